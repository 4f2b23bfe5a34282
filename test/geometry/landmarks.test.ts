// Landmark CSV files (design.md: header label,x,y,z, world RAS mm, --lps flips x and y).
// Quoted-field parsing is checked against Python's csv module (RFC 4180 dialect; fixture from
// scripts/make-fixtures-geometry.py). Landmark names and coordinates here are invented.
import { mkdirSync, mkdtempSync, readdirSync, readFileSync, rmSync, writeFileSync } from "node:fs";
import { tmpdir } from "node:os";
import { join } from "node:path";
import { afterAll, describe, expect, test } from "vitest";
import type { CoxaError } from "../../src/common/errors.js";
import { pairLandmarks, readLandmarks, writeLandmarks } from "../../src/geometry/landmarks.js";

const ref = JSON.parse(readFileSync(new URL("../fixtures/geometry/reference.json", import.meta.url), "utf8"));
const dir = mkdtempSync(join(tmpdir(), "coxa-landmarks-"));
let fileCount = 0;
function file(text: string, name?: string): string {
  const p = join(dir, name ?? `lm-${fileCount++}.csv`);
  writeFileSync(p, text);
  return p;
}
function errorOf(fn: () => unknown): CoxaError {
  try {
    fn();
  } catch (err) {
    return err as CoxaError;
  }
  throw new Error("expected an error");
}
afterAll(() => rmSync(dir, { recursive: true, force: true }));

describe("readLandmarks(path)", () => {
  test("reads labels and RAS mm coordinates in file order with line numbers", () => {
    const p = file("label,x,y,z\nacetabulum_L,10.5,-20,30\nfemoral_head_R,-1e1,0.25,.5\n");
    expect(readLandmarks(p)).toEqual([
      { label: "acetabulum_L", pointMm: [10.5, -20, 30], line: 2 },
      { label: "femoral_head_R", pointMm: [-10, 0.25, 0.5], line: 3 },
    ]);
  });

  test("accepts any column order, case and spacing in the header, a BOM, CRLF and blank lines", () => {
    const p = file("\ufeff Z , Label,X,y\r\n3,a,1,2\r\n\r\n6,b,4,5\r\n");
    const lm = readLandmarks(p);
    expect(lm.map((l) => l.label)).toEqual(["a", "b"]);
    expect(lm[0].pointMm).toEqual([1, 2, 3]);
    expect(lm[1].pointMm).toEqual([4, 5, 6]);
    expect(lm[1].line).toBe(4);
  });

  test("lps: true flips x and y to RAS (design.md)", () => {
    const p = file("label,x,y,z\np,10,-20,30\nq,0,0,1\n");
    const lm = readLandmarks(p, { lps: true });
    expect(lm[0].pointMm).toEqual([-10, 20, 30]);
    expect(Object.is(lm[1].pointMm[0], 0)).toBe(true);
  });

  test("quoted fields read as Python's csv module reads them (RFC 4180)", () => {
    const p = file(ref.csv.text as string);
    const rows = ref.csv.rows as string[][];
    const lm = readLandmarks(p);
    expect(lm.map((l) => l.label)).toEqual(rows.slice(1).map((r) => r[0]));
    expect(lm.map((l) => l.pointMm)).toEqual(rows.slice(1).map((r) => r.slice(1).map(Number)));
    // The label spanning two physical lines starts on line 5, the next record on line 7.
    expect(lm[3].line).toBe(5);
    expect(lm[4].line).toBe(7);
  });

  const cases: [string, string, RegExp][] = [
    ["an empty file", "", /empty/],
    ["a header only", "label,x,y,z\n", /no landmarks/],
    ["a missing column", "label,x,y\na,1,2\n", /no "z" column/],
    ["an extra column", "label,x,y,z,note\na,1,2,3,hi\n", /line 1: unexpected column "note"/],
    ["a repeated column", "label,x,x,z\na,1,2,3\n", /column "x" appears twice/],
    [
      "a row with too few fields",
      "label,x,y,z\na,1,2,3\nb,1,2\n",
      /line 3: has 3 field\(s\), the header has 4/,
    ],
    ["a row with too many fields", "label,x,y,z\na,1,2,3,4\n", /line 2: has 5 field/],
    ["an empty label", "label,x,y,z\n  ,1,2,3\n", /line 2: empty label/],
    [
      "a repeated label",
      "label,x,y,z\na,1,2,3\nb,1,2,3\na,4,5,6\n",
      /line 4: label "a" repeats the one on line 2/,
    ],
    ["a non-numeric coordinate", "label,x,y,z\na,12abc,2,3\n", /line 2: x of "a" is "12abc", not a number/],
    ["an empty coordinate", "label,x,y,z\na,1,,3\n", /line 2: y of "a" is "", not a number/],
    ["NaN", "label,x,y,z\na,1,2,NaN\n", /line 2: z of "a" is "NaN", not a number/],
    [
      "an infinite coordinate",
      "label,x,y,z\na,1e999,2,3\n",
      /line 2: x of "a" is 1e999, not a finite number/,
    ],
    ["an unclosed quote", 'label,x,y,z\n"a,1,2,3\n', /line 2: quoted field is never closed/],
    [
      "text after a closing quote",
      'label,x,y,z\n"a"b,1,2,3\n',
      /line 2: unexpected text after a closing quote/,
    ],
  ];
  for (const [what, text, pattern] of cases) {
    test(`refuses ${what} with BAD_LANDMARKS naming the file`, () => {
      const p = file(text);
      const err = errorOf(() => readLandmarks(p));
      expect(err.code).toBe("BAD_LANDMARKS");
      expect(err.message.startsWith(`${p}: `)).toBe(true);
      expect(err.message).toMatch(pattern);
      expect(err.message).not.toContain("\n");
    });
  }

  test("refuses a missing file and a directory", () => {
    expect(errorOf(() => readLandmarks(join(dir, "nope.csv"))).message).toMatch(
      /nope\.csv: landmark file does not exist/,
    );
    const sub = join(dir, "sub");
    mkdirSync(sub);
    expect(errorOf(() => readLandmarks(sub)).code).toBe("BAD_LANDMARKS");
  });
});

describe("writeLandmarks(path, landmarks)", () => {
  test("write -> read is the identity, also for labels that need quoting and with lps", () => {
    const landmarks = [
      { label: "plain", pointMm: [1.5, -2.25, 1e-7] as [number, number, number] },
      { label: 'say "hi", twice', pointMm: [0.1, 0.2, 0.30000000000000004] as [number, number, number] },
      { label: " padded ", pointMm: [-123.456, 789, 0] as [number, number, number] },
      { label: "two\nlines", pointMm: [1, 2, 3] as [number, number, number] },
    ];
    for (const lps of [false, true]) {
      const p = join(dir, `out-${lps}.csv`);
      writeLandmarks(p, landmarks, { lps });
      const back = readLandmarks(p, { lps });
      expect(back.map((l) => ({ label: l.label, pointMm: l.pointMm }))).toEqual(landmarks);
    }
    expect(readFileSync(join(dir, "out-false.csv"), "utf8").split("\n")[0]).toBe("label,x,y,z");
    expect(readdirSync(dir).some((n) => n.startsWith(".coxa-tmp-"))).toBe(false);
  });

  test("refuses a repeated label or a non-finite coordinate and writes nothing", () => {
    const p = join(dir, "never.csv");
    expect(() =>
      writeLandmarks(p, [
        { label: "a", pointMm: [1, 2, 3] },
        { label: "a", pointMm: [1, 2, 3] },
      ]),
    ).toThrow(/repeats/);
    expect(() => writeLandmarks(p, [{ label: "a", pointMm: [1, Number.NaN, 3] }])).toThrow(/non-finite/);
    expect(readdirSync(dir).includes("never.csv")).toBe(false);
  });
});

describe("pairLandmarks(fixed, moving, fixedPath, movingPath)", () => {
  const fixed = [
    { label: "a", pointMm: [1, 2, 3] as [number, number, number] },
    { label: "b", pointMm: [4, 5, 6] as [number, number, number] },
  ];
  test("matches by label in fixed-file order", () => {
    const moving = [
      { label: "b", pointMm: [40, 50, 60] as [number, number, number] },
      { label: "a", pointMm: [10, 20, 30] as [number, number, number] },
    ];
    const pairs = pairLandmarks(fixed, moving, "f.csv", "m.csv");
    expect(pairs.labels).toEqual(["a", "b"]);
    expect(Array.from(pairs.fixedMm)).toEqual([1, 2, 3, 4, 5, 6]);
    expect(Array.from(pairs.movingMm)).toEqual([10, 20, 30, 40, 50, 60]);
  });

  test("refuses a label present in only one file, naming it and the file", () => {
    const onlyA = [{ label: "a", pointMm: [0, 0, 0] as [number, number, number] }];
    const e1 = errorOf(() => pairLandmarks(fixed, onlyA, "f.csv", "m.csv"));
    expect(e1.code).toBe("BAD_LANDMARKS");
    expect(e1.message).toBe('f.csv: label "b" has no match in m.csv');
    const extra = [...fixed, { label: "c", pointMm: [0, 0, 0] as [number, number, number] }];
    const e2 = errorOf(() => pairLandmarks(fixed, extra, "f.csv", "m.csv"));
    expect(e2.message).toBe('m.csv: label "c" has no match in f.csv');
    expect(errorOf(() => pairLandmarks([], fixed, "f.csv", "m.csv")).message).toBe("f.csv: has no landmarks");
  });
});
