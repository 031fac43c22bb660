import { describe, expect, it } from "vitest";
import { z } from "zod";
import {
  checkbox,
  multilineText,
  optionalText,
  readDecimal,
  requiredText,
  textProblem,
} from "../../../app/services/form-fields";
import { parseLabText, parseNumberList, type LabText } from "../../../app/services/lab-spec";

const issue = (schema: z.ZodType, v: unknown) => {
  const r = schema.safeParse(v);
  return r.success ? null : r.error.issues[0]?.message;
};

describe("text as characters", () => {
  it("names a control character by its code point", () => {
    expect(textProblem("a\u0000b", "the name")).toBe("Remove the control character (U+0000) from the name.");
    expect(textProblem("a\u007fb", "the name")).toBe("Remove the control character (U+007F) from the name.");
    expect(textProblem("a\u001bb", "the notes", true)).toBe("Remove the control character (U+001B) from the notes.");
  });

  it("keeps one-line text on one line and lets notes have lines and tabs", () => {
    expect(textProblem("a\nb", "the tag")).toBe("Keep the tag on one line, without tabs or line breaks.");
    expect(textProblem("a\tb", "the tag")).toBe("Keep the tag on one line, without tabs or line breaks.");
    expect(textProblem("line one\r\n\tline two", "the notes", true)).toBeNull();
  });

  it("refuses half a character and the mark of a garbled encoding, not whole characters", () => {
    expect(textProblem("a\uD800b", "the name")).toBe(
      "The name has a character that did not arrive intact; type it again.",
    );
    expect(textProblem("a\uDC00", "the name")).toMatch(/did not arrive intact/);
    expect(textProblem("a\uFFFDb", "the name")).toMatch(/did not arrive intact/);
    expect(textProblem("Ünïcødé 🧪 – µm", "the name")).toBeNull();
  });

  it("is part of every text rule", () => {
    expect(issue(requiredText("the tag", 40), "U\u00001")).toBe("Remove the control character (U+0000) from the tag.");
    expect(issue(optionalText("the lot", 40), "L\n7")).toBe("Keep the lot on one line, without tabs or line breaks.");
    expect(issue(multilineText("the notes", 400), "one\ntwo")).toBeNull();
    expect(issue(multilineText("the notes", 400), "one\u0007")).toBe(
      "Remove the control character (U+0007) from the notes.",
    );
  });
});

describe("numbers that are not numbers", () => {
  it("refuses what JavaScript would read as something else", () => {
    for (const raw of ["NaN", "Infinity", "-Infinity", "0x10", "1_000", "1e5e5"])
      expect(readDecimal(raw), raw).toEqual({ problem: `'${raw}' is not a number` });
    expect(readDecimal("1e309")).toEqual({ problem: "'1e309' is too large a number" });
    expect(readDecimal("-1e309")).toEqual({ problem: "'-1e309' is too large a number" });
    expect(readDecimal(Number.POSITIVE_INFINITY)).toEqual({ problem: "this is not a finite number" });
    expect(readDecimal("1e3")).toEqual({ value: 1000 });
  });
});

describe("a tick box", () => {
  it("takes on and off only", () => {
    const box = checkbox(true);
    expect(box.parse("on")).toBe(true);
    expect(box.parse("off")).toBe(false);
    expect(box.parse(undefined)).toBe(true);
    expect(issue(box, "perhaps")).toBe("Tick the box or leave it empty.");
  });
});

describe("lists over their limit", () => {
  it("refuses more than 200 pit depths without reading each value", () => {
    const many = Array.from({ length: 200_000 }, () => "0.1").join(",");
    expect(parseNumberList(many)).toEqual({ values: [], problems: ["enter at most 200 values (200000 were given)"] });
    expect(parseNumberList(Array.from({ length: 200 }, () => "0.1").join(" ")).values).toHaveLength(200);
  });

  it("names the field for a pit list and a cycle list that are too long", () => {
    const lab: LabText = {
      cleaningMethod: "",
      massLossMethod: "last-cycle",
      couponMassesG: Array.from({ length: 5000 }, () => "35.9"),
      finalMassG: "",
      blankInitialMassG: "",
      blankMassesG: [],
      baseMetalFromCycle: "",
      pitDepthsMm: Array.from({ length: 201 }, () => "0.1").join(","),
      labNotes: "",
    };
    const { errors } = parseLabText(lab);
    expect(errors.couponMassesG).toBe("Coupon mass: enter at most 10 cleaning cycles (5000 were given).");
    expect(errors.pitDepthsMm).toBe("Pit depths: enter at most 200 values (201 were given).");
  });
});
