import { createElement } from "react";
import { renderToStaticMarkup } from "react-dom/server";
import { describe, expect, it } from "vitest";
import { keepTogether, unbreakableRuns } from "../../../app/components/keep-together";

const runs = (text: string) => unbreakableRuns(text).map(([a, b]) => text.slice(a, b));

describe("text kept on one line", () => {
  it("finds references, tags, serials, dates with times and values with their units", () => {
    expect(runs("Submission THG-SUB-00017")).toEqual(["THG-SUB-00017"]);
    expect(runs("THG-CH-042 (circuit OVHD-01) at Thornby")).toEqual(["THG-CH-042", "OVHD-01"]);
    expect(runs("ETH-S-1000, installed 2026-08-31 11:00")).toEqual(["ETH-S-1000", "2026-08-31 11:00"]);
    expect(runs("0.0355 g and 0.68 mpy, 0.064 mm/y, 7.86 g/cm³, 94.7 d")).toEqual([
      "0.0355 g",
      "0.68 mpy",
      "0.064 mm/y",
      "7.86 g/cm³",
      "94.7 d",
    ]);
  });

  it("leaves ordinary words, time zones and numbers followed by words free to wrap", () => {
    expect(runs("times in America/Argentina/Buenos_Aires")).toEqual([]);
    expect(runs("3 cleaning cycles were entered")).toEqual([]);
    expect(runs("12 days in service")).toEqual([]);
  });

  it("wraps each run in a no-wrap span inside text, arrays and plain elements, and changes no words", () => {
    const node = keepTogether(["Remove ", createElement("a", { key: "a" }, "ETH-S-1000"), " at 0.45 g"]);
    const html = renderToStaticMarkup(createElement("p", null, node));
    expect(html).toBe(
      '<p>Remove <a><span class="whitespace-nowrap">ETH-S-1000</span></a> at <span class="whitespace-nowrap">0.45 g</span></p>',
    );
    expect(renderToStaticMarkup(createElement("p", null, keepTogether("no references here")))).toBe(
      "<p>no references here</p>",
    );
  });
});
