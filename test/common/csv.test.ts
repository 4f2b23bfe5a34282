/** CSV reading and writing against RFC 4180's rules and its examples (section 2). */
import { describe, expect, it } from "vitest";
import { CsvSyntaxError, csvField, formatCsv, parseCsv } from "../../src/common/csv.js";

describe("parseCsv (RFC 4180)", () => {
  it("reads the RFC's examples: CRLF records, quoted fields with commas, doubled quotes and line breaks", () => {
    // RFC 4180 section 2, rules 1, 5, 6 and 7.
    const text = 'aaa,bbb,ccc\r\nzzz,yyy,xxx\r\n"aaa","b\r\nbb","ccc"\r\n"aaa","b""bb","c,cc"\r\n';
    const r = parseCsv(text);
    expect(r.map((x) => x.fields)).toEqual([
      ["aaa", "bbb", "ccc"],
      ["zzz", "yyy", "xxx"],
      ["aaa", "b\r\nbb", "ccc"],
      ["aaa", 'b"bb', "c,cc"],
    ]);
    expect(r.map((x) => x.line)).toEqual([1, 2, 3, 5]);
    expect(r[2].quoted).toEqual([true, true, true]);
  });

  it("ignores a byte-order mark, skips blank lines, accepts a last record without line end", () => {
    const r = parseCsv("\ufeffa,b\n\n  \nc,d");
    expect(r.map((x) => x.fields)).toEqual([
      ["a", "b"],
      ["c", "d"],
    ]);
    expect(r[1].line).toBe(4);
  });

  it("reports an unclosed quote and text after a closing quote with their lines", () => {
    expect(() => parseCsv('a\n"open,b\n')).toThrow(CsvSyntaxError);
    try {
      parseCsv('a,b\n"x"y,z\n');
      expect.fail("no error");
    } catch (err) {
      expect((err as CsvSyntaxError).line).toBe(2);
      expect((err as Error).message).toMatch(/after a closing quote/);
    }
  });
});

describe("csvField / formatCsv", () => {
  it("quotes only fields that need it and round-trips through parseCsv", () => {
    expect(csvField("plain")).toBe("plain");
    expect(csvField(1.5)).toBe("1.5");
    expect(csvField(null)).toBe("");
    expect(csvField('failed: a "b", c')).toBe('"failed: a ""b"", c"');
    expect(csvField(" lead")).toBe('" lead"');
    const rows = [
      ["x,y", 'say "hi"', "line\nbreak", 3],
      ["", null, "z", -0.25],
    ];
    const text = formatCsv(["a", "b", "c", "d"], rows);
    expect(text.endsWith("\n")).toBe(true);
    const back = parseCsv(text).map((r) => r.fields);
    expect(back).toEqual([
      ["a", "b", "c", "d"],
      ["x,y", 'say "hi"', "line\nbreak", "3"],
      ["", "", "z", "-0.25"],
    ]);
  });
});
