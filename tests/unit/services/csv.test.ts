import { parse } from "csv-parse/sync";
import { describe, expect, it } from "vitest";
import { guardCell, toCsv } from "../../../app/services/csv";

// The guard follows the common practice for CSV formula injection: a text cell a
// spreadsheet would evaluate (= + - @, tab, CR, LF first) is prefixed with an apostrophe.
// Quoting follows RFC 4180.

describe("guardCell", () => {
  it.each(["=1+2", "+1", "-1", "@SUM(A1)", "\tx", "\rx", "\nx"])("neutralises text starting %j", (text) => {
    expect(guardCell(text)).toBe(`'${text}`);
  });

  it.each([" =1+2", "  +cmd", "\u00a0-2", " \t@x"])("neutralises %j after leading blanks", (text) => {
    expect(guardCell(text)).toBe(`'${text}`);
  });

  it("leaves ordinary text alone", () => {
    for (const text of ["CS-24001", "a=b", "Moved, per MOC", "x-1", "", " plain", "'quoted"]) {
      expect(guardCell(text)).toBe(text);
    }
  });

  it("keeps JavaScript numbers as numbers, negatives too", () => {
    expect(guardCell(-12.5)).toBe(-12.5);
    expect(guardCell(0)).toBe(0);
    expect(guardCell(-0.0123)).toBe(-0.0123);
    expect(guardCell(Number.NaN)).toBe("");
  });

  it("writes empty, boolean, date and object values as text", () => {
    expect(guardCell(null)).toBe("");
    expect(guardCell(undefined)).toBe("");
    expect(guardCell(true)).toBe("true");
    expect(guardCell(new Date("2026-03-29T01:30:00Z"))).toBe("2026-03-29T01:30:00.000Z");
    expect(guardCell({ a: "=x" })).toBe('{"a":"=x"}');
  });
});

describe("toCsv", () => {
  it("writes a header and rows with CRLF line ends", () => {
    expect(toCsv(["a", "b"], [["1", 2]])).toBe("a,b\r\n1,2\r\n");
    expect(toCsv(["a"], [])).toBe("a\r\n");
  });

  it("quotes commas, quotes and line breaks", () => {
    expect(toCsv(["x"], [["a,b"], ['say "hi"'], ["one\ntwo"], ["one\r\ntwo"]])).toBe(
      'x\r\n"a,b"\r\n"say ""hi"""\r\n"one\ntwo"\r\n"one\r\ntwo"\r\n',
    );
  });

  it("puts numbers in unquoted and unguarded, guards text", () => {
    expect(toCsv(["t", "note"], [[-12.5, "-12.5"]])).toBe("t,note\r\n-12.5,'-12.5\r\n");
  });

  it("adds a byte-order mark only when asked", () => {
    expect(toCsv(["a"], [], { bom: true })).toBe("\uFEFFa\r\n");
    expect(toCsv(["a"], []).startsWith("\uFEFF")).toBe(false);
  });

  it("round-trips through csv-parse", () => {
    const rows = [
      ["CS-24001", -12.5, 'Moved, "per" MOC\nline two', "", "=cmd|' /C calc'!A0"],
      ["ü ß 温度", 0.0001, "a\r\nb", " @x", "plain"],
    ];
    const parsed: string[][] = parse(toCsv(["serial", "temperature_c", "reason", "empty", "actor"], rows), {
      bom: true,
    });
    expect(parsed[0]).toEqual(["serial", "temperature_c", "reason", "empty", "actor"]);
    expect(parsed.slice(1)).toEqual(
      rows.map((r) =>
        r.map((v) => (typeof v === "number" ? String(v) : /^(?:[\t\r\n]|\s*[=+\-@])/.test(v) ? `'${v}` : v)),
      ),
    );
    expect(Number(parsed[1][1])).toBe(-12.5);
  });
});
