import { describe, expect, it } from "vitest";
import { checkerboard, maskOutline, thinEdges } from "../../src/report/overlay.js";

describe("checkerboard", () => {
  it("checkerboard tiles are tileMm wide: 10 mm tiles at 2 px/mm are 20 px squares starting with image a", () => {
    const width = 60;
    const height = 50;
    const a = new Uint8Array(width * height).fill(10);
    const b = new Uint8Array(width * height).fill(250);
    const out = checkerboard(new Uint8Array(width * height), a, b, width, height, 2, 2, 10);
    const at = (x: number, y: number) => out[y * width + x];
    // Tile (c, r) = (floor(x / 20), floor(y / 20)); even c + r -> a.
    expect([at(0, 0), at(19, 19), at(20, 0), at(39, 19), at(40, 0)]).toEqual([10, 10, 250, 250, 10]);
    expect([at(0, 20), at(20, 20), at(59, 49)]).toEqual([250, 10, 10]);
    let fromA = 0;
    for (let p = 0; p < out.length; p++) if (out[p] === 10) fromA++;
    // Rows 0-19 and 40-49: columns 0-19 and 40-59 from a; rows 20-39: columns 20-39 from a.
    expect(fromA).toBe(20 * 40 + 20 * 20 + 10 * 40);
  });

  it("checkerboard honours different pixel sizes per axis (tiles stay square in mm)", () => {
    const width = 40;
    const height = 40;
    const a = new Uint8Array(width * height).fill(0);
    const b = new Uint8Array(width * height).fill(1);
    // 1 px/mm across, 4 px/mm down, 5 mm tiles: 5 px wide, 20 px tall.
    const out = checkerboard(new Uint8Array(width * height), a, b, width, height, 1, 4, 5);
    expect([out[4], out[5], out[19 * width], out[20 * width], out[20 * width + 5]]).toEqual([0, 1, 0, 1, 0]);
  });

  it("checkerboard may write over one of its inputs and rejects a non-positive tile", () => {
    const a = new Uint8Array([1, 1, 1, 1]);
    const b = new Uint8Array([2, 2, 2, 2]);
    checkerboard(a, a, b, 2, 2, 1, 1, 1);
    expect(Array.from(a)).toEqual([1, 2, 2, 1]);
    expect(() => checkerboard(a, a, b, 2, 2, 1, 1, 0)).toThrowError(/not positive/);
  });
});

describe("thinEdges", () => {
  it("a vertical step gives a one-pixel-wide edge at the step, and nothing elsewhere", () => {
    const width = 40;
    const height = 30;
    const values = new Float32Array(width * height);
    for (let y = 0; y < height; y++) for (let x = 20; x < width; x++) values[y * width + x] = 100;
    const edges = thinEdges(new Uint8Array(width * height), values, width, height);
    for (let y = 3; y < height - 3; y++) {
      const xs: number[] = [];
      for (let x = 0; x < width; x++) if (edges[y * width + x]) xs.push(x);
      // The step lies between x = 19 and x = 20; the gradient peaks on one of the two.
      expect(xs.length, `row ${y}`).toBe(1);
      expect([19, 20]).toContain(xs[0]);
    }
  });

  it("the edge of a disc of radius 12 px lies within 1 px of the circle", () => {
    const size = 48;
    const c = 23.5;
    const values = new Float32Array(size * size);
    for (let y = 0; y < size; y++)
      for (let x = 0; x < size; x++) values[y * size + x] = Math.hypot(x - c, y - c) < 12 ? 500 : 20;
    const edges = thinEdges(new Uint8Array(size * size), values, size, size);
    let count = 0;
    for (let y = 0; y < size; y++) {
      for (let x = 0; x < size; x++) {
        if (!edges[y * size + x]) continue;
        count++;
        expect(Math.abs(Math.hypot(x - c, y - c) - 12), `pixel ${x},${y}`).toBeLessThanOrEqual(1.01);
      }
    }
    // A thin closed contour: about the circumference 2 pi 12 ~ 75 pixels, not a thick band.
    expect(count).toBeGreaterThan(50);
    expect(count).toBeLessThan(110);
  });

  it("a constant image has no edges; NaN areas are filled before differencing", () => {
    const values = new Float32Array(100).fill(3);
    expect(thinEdges(new Uint8Array(100), values, 10, 10).reduce((s, v) => s + v, 0)).toBe(0);
    values.fill(Number.NaN, 0, 50);
    const edges = thinEdges(new Uint8Array(100), values, 10, 10, { fill: 3 });
    expect(edges.reduce((s, v) => s + v, 0)).toBe(0);
    expect(() => thinEdges(new Uint8Array(100), values, 10, 10, { percentile: 120 })).toThrowError(/outside/);
  });
});

describe("maskOutline", () => {
  it("the outline of a 5 x 5 square is its 16 border pixels", () => {
    const width = 10;
    const mask = new Uint8Array(100);
    for (let y = 2; y < 7; y++) for (let x = 3; x < 8; x++) mask[y * width + x] = 1;
    const out = maskOutline(new Uint8Array(100), mask, width, 10);
    expect(out.reduce((s, v) => s + v, 0)).toBe(16);
    expect([out[2 * width + 3], out[4 * width + 5], out[4 * width + 2], out[6 * width + 7]]).toEqual([
      1, 0, 0, 1,
    ]);
  });

  it("a 2-pixel outline adds the next ring inwards (16 + 8 pixels) and aliasing is refused", () => {
    const width = 10;
    const mask = new Uint8Array(100);
    for (let y = 2; y < 7; y++) for (let x = 3; x < 8; x++) mask[y * width + x] = 1;
    expect(maskOutline(new Uint8Array(100), mask, width, 10, 2).reduce((s, v) => s + v, 0)).toBe(24);
    expect(() => maskOutline(mask, mask, width, 10)).toThrowError(/alias/);
  });
});
