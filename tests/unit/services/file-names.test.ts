import { describe, expect, it } from "vitest";
import { cleanFileName } from "../../../app/services/file-names";

describe("cleanFileName", () => {
  it("removes control characters and bidirectional marks, keeping the readable name", () => {
    expect(cleanFileName("invoice\u202Efdp.exe")).toBe("invoicefdp.exe");
    expect(cleanFileName("a\u0000b\u0007c\u001f.png")).toBe("abc.png");
    expect(cleanFileName("\u2066x\u2069\u200e\u200f\u061c\u202a\u202b\u202c\u202d.jpg")).toBe("x.jpg");
    expect(cleanFileName("line\r\nbreak\ttab.pdf")).toBe("line break tab.pdf");
    expect(cleanFileName("\u0085\u009f\u007f")).toBe("file");
    expect(cleanFileName("  Ølgård prøve 1.jpg ")).toBe("Ølgård prøve 1.jpg");
    expect(Array.from(cleanFileName("é".repeat(300)))).toHaveLength(255);
  });
});
