import { PNG } from "pngjs";
import { describe, expect, it } from "vitest";
import { fromRows } from "../../src/geometry/mat4.js";
import { Volume } from "../../src/image/volume.js";
import { PALETTE } from "../../src/report/html.js";
import { type PlanePanelInput, renderPlanePanels } from "../../src/report/panels.js";
import { windowFromLevelWidth } from "../../src/report/window.js";

// RAS grid 20 x 20 x 10, spacing 1 x 1 x 2 mm, origin at 0: voxel (i, j, k) is at (i, j, 2k) mm.
const AFFINE = fromRows([
  [1, 0, 0, 0],
  [0, 1, 0, 0],
  [0, 0, 2, 0],
  [0, 0, 0, 1],
]);
const DIMS: [number, number, number] = [20, 20, 10];

function hexRgb(hex: string): [number, number, number] {
  const v = Number.parseInt(hex.slice(1), 16);
  return [(v >> 16) & 255, (v >> 8) & 255, v & 255];
}

function decodePanel(html: string) {
  const m = html.match(/href="data:image\/png;base64,([^"]+)"/);
  expect(m).not.toBeNull();
  return PNG.sync.read(Buffer.from(m![1], "base64"));
}

function baseInput(
  fixedData: Float32Array,
  movingData: Float32Array,
  extra: Partial<PlanePanelInput> = {},
): PlanePanelInput {
  return {
    fixed: new Volume(DIMS, fixedData, AFFINE),
    movingOnFixed: new Volume(DIMS, movingData, AFFINE),
    fixedWindow: windowFromLevelWidth(500, 1000, "HU"), // 0 .. 1000
    movingWindow: windowFromLevelWidth(50, 100, ""), // 0 .. 100
    fixedName: "CT",
    movingName: "MR",
    maxPanelPx: 40, // 2 px per mm in the axial plane
    ...extra,
  };
}

describe("renderPlanePanels", () => {
  it("marks a fixed landmark at the hand-computed display pixel and a mapped moving landmark 1 mm to the patient's right", () => {
    const n = 4000;
    const input = baseInput(new Float32Array(n), new Float32Array(n), {
      landmarks: [
        { label: "A", fixedMm: [5, 8, 8], mappedMovingMm: [6, 8, 8] },
        { label: "far", fixedMm: [5, 8, 8 + 10] }, // 10 mm off the plane: not marked
      ],
    });
    const pp = renderPlanePanels(input, "axial", [5, 8, 8]);
    expect([pp.width, pp.height, pp.sliceIndex]).toEqual([40, 40, 4]);
    expect(pp.markedLandmarks).toEqual(["A"]);
    // Axial, radiological: col = 19 - i = 14, row = 19 - j = 11; 2 px per mm -> (14.5 * 2, 11.5 * 2).
    for (const panel of pp.panels) {
      expect(panel.html).toContain('<circle class="lm-fixed" cx="29" cy="23"');
      // x = 6 mm is further right -> further left on screen: col 13 -> x = 27.
      expect(panel.html).toContain('class="lm-moving" data-cx="27" data-cy="23"');
      expect(panel.html).not.toContain('data-label="far"');
    }
    // Orientation letters of the axial plane.
    expect(pp.panels[0].html).toMatch(
      /<g class="letters"[^>]*><text[^>]*>R<\/text><text[^>]*>L<\/text><text[^>]*>A<\/text><text[^>]*>P<\/text>/,
    );
  });

  it("the checkerboard panel alternates windowed CT and MR in 5 mm tiles", () => {
    const fixed = new Float32Array(4000).fill(1000); // white in 0..1000 HU
    const moving = new Float32Array(4000).fill(50); // 128 in 0..100
    const pp = renderPlanePanels(baseInput(fixed, moving, { checkerTileMm: 5 }), "axial", [10, 10, 10]);
    const img = decodePanel(pp.panels.find((p) => p.kind === "checkerboard")!.html);
    const at = (x: number, y: number) => img.data[(y * img.width + x) * 4];
    // 2 px per mm: tiles of 10 px starting with CT at the top-left corner.
    expect([at(0, 0), at(9, 9), at(10, 0), at(0, 10), at(10, 10), at(25, 5)]).toEqual([
      255, 255, 128, 128, 255, 255,
    ]);
  });

  it("edges of the MR are painted over the CT at the MR's step, and the metal outline in its colour", () => {
    const fixed = new Float32Array(4000).fill(500);
    const moving = new Float32Array(4000);
    const mask = new Uint8Array(4000);
    for (let k = 0; k < 10; k++)
      for (let j = 0; j < 20; j++)
        for (let i = 0; i < 20; i++) {
          const p = i + 20 * (j + 20 * k);
          if (i >= 10) moving[p] = 100; // MR step between i = 9 and 10 (x = 9.5 mm)
          if (i >= 3 && i <= 6 && j >= 3 && j <= 6) mask[p] = 1;
        }
    const pp = renderPlanePanels(baseInput(fixed, moving, { metalMask: mask }), "axial", [10, 10, 10]);
    const edge = hexRgb(PALETTE.edge);
    const metal = hexRgb(PALETTE.metal);
    const img = decodePanel(pp.panels.find((p) => p.kind === "edges")!.html);
    const colourAt = (x: number, y: number) =>
      Array.from(img.data.subarray((y * img.width + x) * 4, (y * img.width + x) * 4 + 3));
    // x = 9.5 mm sits at col 19 - 9.5 = 9.5 -> display x = 10 * 2 = 20 (between pixels 19 and 20).
    for (let y = 4; y < 36; y++) {
      const xs: number[] = [];
      for (let x = 0; x < img.width; x++) if (colourAt(x, y).join() === edge.join()) xs.push(x);
      expect(xs.length, `row ${y}`).toBe(1);
      expect([19, 20]).toContain(xs[0]);
    }
    // Mask i 3..6, j 3..6 -> cols 13..16, rows 13..16 -> display 26..33: outline on its border, CT grey inside.
    expect(colourAt(26, 29)).toEqual(metal);
    expect(colourAt(33, 29)).toEqual(metal);
    expect(colourAt(29, 29)).toEqual([128, 128, 128]); // 500 HU in 0..1000
    const fixedPanel = decodePanel(pp.panels.find((p) => p.kind === "fixed")!.html);
    expect(Array.from(fixedPanel.data.subarray((29 * 40 + 26) * 4, (29 * 40 + 26) * 4 + 3))).toEqual(metal);
  });

  it("renderPlanePanels refuses a moving image or mask that is not on the fixed grid", () => {
    const input = baseInput(new Float32Array(4000), new Float32Array(4000));
    const other = new Volume(
      [20, 20, 10],
      new Float32Array(4000),
      fromRows([
        [1, 0, 0, 5],
        [0, 1, 0, 0],
        [0, 0, 2, 0],
        [0, 0, 0, 1],
      ]),
    );
    expect(() => renderPlanePanels({ ...input, movingOnFixed: other }, "axial", [0, 0, 0])).toThrowError(
      /affine/,
    );
    const small = new Volume([20, 20, 9], new Float32Array(3600), AFFINE);
    expect(() => renderPlanePanels({ ...input, movingOnFixed: small }, "axial", [0, 0, 0])).toThrowError(
      /not on the fixed grid/,
    );
    expect(() =>
      renderPlanePanels({ ...input, metalMask: new Uint8Array(10) }, "axial", [0, 0, 0]),
    ).toThrowError(/metal mask/);
  });
});
