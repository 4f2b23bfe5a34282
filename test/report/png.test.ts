import { readFileSync } from "node:fs";
import { PNG } from "pngjs";
import { describe, expect, it } from "vitest";
import { CoxaError } from "../../src/common/errors.js";
import {
  createRaster,
  encodePng,
  greyToRgb,
  paintMask,
  pngDataUri,
  type RasterImage,
} from "../../src/report/png.js";
import {
  applyWindow,
  ctWindow,
  percentiles,
  percentileWindow,
  windowFromLevelWidth,
} from "../../src/report/window.js";
import { expectAllClose } from "../helpers/close.js";

const reference = JSON.parse(
  readFileSync(new URL("../fixtures/report/reference.json", import.meta.url), "utf8"),
) as {
  percentile: { data: (number | null)[]; percents: number[]; values: number[] };
};

/** Colour type byte of a PNG: IHDR is the first chunk, colour type at file offset 25 (PNG spec 11.2.2). */
function colourType(png: Buffer): number {
  expect(png.subarray(12, 16).toString("latin1")).toBe("IHDR");
  return png[25];
}

describe("encodePng", () => {
  it("encodePng(grey) writes colour type 0 and pngjs decodes the same bytes at every pixel", () => {
    const img = createRaster(7, 5, 1);
    for (let p = 0; p < img.data.length; p++) img.data[p] = (p * 37) % 256;
    const png = encodePng(img);
    expect(colourType(png)).toBe(0); // PNG: greyscale
    const decoded = PNG.sync.read(png);
    expect([decoded.width, decoded.height]).toEqual([7, 5]);
    for (let y = 0; y < 5; y++) {
      for (let x = 0; x < 7; x++) {
        const q = (y * 7 + x) * 4;
        const v = img.data[y * 7 + x];
        expect([decoded.data[q], decoded.data[q + 1], decoded.data[q + 2], decoded.data[q + 3]]).toEqual([
          v,
          v,
          v,
          255,
        ]);
      }
    }
  });

  it("encodePng(rgb) and encodePng(rgba) round-trip through pngjs with colour types 2 and 6", () => {
    const rgb = createRaster(3, 2, 3);
    const rgba = createRaster(3, 2, 4);
    for (let p = 0; p < rgb.data.length; p++) rgb.data[p] = (p * 29 + 3) % 256;
    for (let p = 0; p < rgba.data.length; p++) rgba.data[p] = (p * 53 + 1) % 256;
    const a = encodePng(rgb);
    const b = encodePng(rgba);
    expect(colourType(a)).toBe(2);
    expect(colourType(b)).toBe(6);
    const da = PNG.sync.read(a);
    const db = PNG.sync.read(b);
    for (let p = 0; p < 6; p++) {
      expect([da.data[4 * p], da.data[4 * p + 1], da.data[4 * p + 2]]).toEqual([
        rgb.data[3 * p],
        rgb.data[3 * p + 1],
        rgb.data[3 * p + 2],
      ]);
      expect(Array.from(db.data.subarray(4 * p, 4 * p + 4))).toEqual(
        Array.from(rgba.data.subarray(4 * p, 4 * p + 4)),
      );
    }
  });

  it("pngDataUri(image) is a base64 PNG data URI that decodes to the image", () => {
    const img = createRaster(2, 2, 1);
    img.data.set([0, 85, 170, 255]);
    const uri = pngDataUri(img);
    expect(uri.startsWith("data:image/png;base64,")).toBe(true);
    const decoded = PNG.sync.read(Buffer.from(uri.slice("data:image/png;base64,".length), "base64"));
    expect([decoded.data[0], decoded.data[4], decoded.data[8], decoded.data[12]]).toEqual([0, 85, 170, 255]);
  });

  it("encodePng rejects data of the wrong length and non-integer sizes with BAD_ARGUMENT", () => {
    const bad: RasterImage = { width: 3, height: 3, channels: 1, data: new Uint8Array(8) };
    expect(() => encodePng(bad)).toThrowError(CoxaError);
    expect(() => encodePng(bad)).toThrowError(/8 bytes/);
    expect(() => createRaster(0, 3, 1)).toThrowError(/positive integer/);
    expect(() => createRaster(2.5, 3, 3)).toThrowError(/positive integer/);
  });

  it("greyToRgb copies grey into R, G, B and paintMask blends a colour where the mask is set", () => {
    const grey = createRaster(2, 1, 1);
    grey.data.set([10, 200]);
    const rgb = greyToRgb(grey);
    expect(Array.from(rgb.data)).toEqual([10, 10, 10, 200, 200, 200]);
    paintMask(rgb, new Uint8Array([0, 1]), [255, 0, 100], 0.5);
    // 200 + 0.5 (255 - 200) = 227.5 -> 228; 200 + 0.5 (0 - 200) = 100; 200 + 0.5 (100 - 200) = 150
    expect(Array.from(rgb.data)).toEqual([10, 10, 10, 228, 100, 150]);
    expect(() => paintMask(grey, new Uint8Array(2), [0, 0, 0])).toThrowError(/RGB/);
  });
});

describe("display windows", () => {
  it("ctWindow() is level 300 / width 1800 HU, i.e. -600 .. 1200 HU", () => {
    const w = ctWindow();
    expect([w.low, w.high]).toEqual([-600, 1200]);
    expect(w.label).toBe("level 300 / width 1800 HU");
    expect(ctWindow("soft")).toMatchObject({ low: -160, high: 240 });
  });

  it("applyWindow maps values by round(255 (v - low) / (high - low)) clamped, NaN to 0 (closed form)", () => {
    const w = windowFromLevelWidth(300, 1800);
    const values = new Float32Array([-1000, -600, 300, 1200, 3000, Number.NaN, 0, -150]);
    const out = applyWindow(new Uint8Array(values.length), values, w);
    // 300: 255 * 900/1800 = 127.5 -> 128; 0: 255 * 600/1800 = 85; -150: 255 * 450/1800 = 63.75 -> 64
    expect(Array.from(out)).toEqual([0, 0, 128, 255, 255, 0, 85, 64]);
  });

  it("a windowed slice encoded as PNG has the closed-form grey value at known pixels", () => {
    // Slice 4 x 3, value = 100 * (x + 4 y) - 600 HU; window -600 .. 1200 HU.
    const width = 4;
    const height = 3;
    const slice = new Float32Array(width * height);
    for (let y = 0; y < height; y++)
      for (let x = 0; x < width; x++) slice[y * width + x] = 100 * (x + 4 * y) - 600;
    const img = createRaster(width, height, 1);
    applyWindow(img.data, slice, ctWindow());
    const decoded = PNG.sync.read(encodePng(img));
    const at = (x: number, y: number) => decoded.data[(y * width + x) * 4];
    expect(at(0, 0)).toBe(0); // -600 HU
    expect(at(3, 0)).toBe(Math.round((255 * 300) / 1800)); // -300 HU -> 42.5 -> 43
    expect(at(1, 2)).toBe(Math.round((255 * 900) / 1800)); // 300 HU
    expect(at(3, 2)).toBe(Math.round((255 * 1100) / 1800)); // 500 HU -> 155.83 -> 156
  });

  it("percentiles() matches numpy.percentile (linear) on the reference sample", () => {
    // Reference: numpy.percentile(method="linear"), scripts/make-fixtures-report.py.
    const data = Float64Array.from(reference.percentile.data.map((v) => (v === null ? Number.NaN : v)));
    expectAllClose(
      percentiles(data, reference.percentile.percents),
      reference.percentile.values,
      1e-9,
      "percentile",
    );
  });

  it("percentiles([1, 2, 3, 4], [25, 50]) is [1.75, 2.5] (Hyndman & Fan definition 7, by hand)", () => {
    expect(percentiles([1, 2, 3, 4], [25, 50])).toEqual([1.75, 2.5]);
    expect(percentiles([Number.NaN], [50])[0]).toBeNaN();
    expect(() => percentiles([1], [101])).toThrowError(/outside 0..100/);
  });

  it("percentileWindow(0..100) is 1 .. 99, and a constant image gets value ± 0.5", () => {
    const ramp = Float32Array.from({ length: 101 }, (_, i) => i);
    const w = percentileWindow(ramp);
    expect([w.low, w.high]).toEqual([1, 99]);
    const flat = percentileWindow(new Float32Array(10).fill(7));
    expect([flat.low, flat.high]).toEqual([6.5, 7.5]);
    expect(() => percentileWindow(ramp, 50, 50)).toThrowError(/empty/);
  });
});
