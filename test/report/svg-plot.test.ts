import { describe, expect, it } from "vitest";
import {
  histogramBins,
  histogramPlot,
  linePlot,
  metricTracePlot,
  niceTicks,
  scatterPlot,
} from "../../src/report/svg-plot.js";
import { expectAllClose } from "../helpers/close.js";

/** Linear map data -> SVG fitted from the tick labels (value in data-value, position in x or y). */
function axisMap(
  svg: string,
  axis: "x" | "y",
): { toData: (px: number) => number; ticks: number[]; pos: number[] } {
  const re = new RegExp(
    `<text class="tick-${axis}" data-value="([^"]+)" x="([^"]+)" y="([^"]+)"[^>]*>([^<]*)</text>`,
    "g",
  );
  const ticks: number[] = [];
  const pos: number[] = [];
  for (const m of svg.matchAll(re)) {
    ticks.push(Number(m[1]));
    pos.push(Number(axis === "x" ? m[2] : m[3]));
    // The printed label shows the same number as data-value (minus sign as U+2212).
    expect(Number(m[4].replace("\u2212", "-"))).toBe(Number(m[1]));
  }
  expect(ticks.length).toBeGreaterThanOrEqual(2);
  const n = ticks.length - 1;
  const slope = (pos[n] - pos[0]) / (ticks[n] - ticks[0]);
  // Ticks are linear in position (honest axis): every tick sits on the line through the ends.
  for (let i = 0; i < ticks.length; i++)
    expect(Math.abs(pos[0] + slope * (ticks[i] - ticks[0]) - pos[i])).toBeLessThan(0.02);
  return { toData: (px) => ticks[0] + (px - pos[0]) / slope, ticks, pos };
}

function polylines(svg: string): [number, number][][] {
  return [...svg.matchAll(/<polyline class="series-line" points="([^"]+)"/g)].map((m) =>
    m[1].split(" ").map((pair) => pair.split(",").map(Number) as [number, number]),
  );
}

describe("niceTicks (Heckbert 1990, values worked by hand from the published algorithm)", () => {
  it("niceTicks(0, 7.3, 5): range 10, step nice(2.5) = 2, ticks 0..8", () => {
    expect(niceTicks(0, 7.3, 5)).toMatchObject({
      min: 0,
      max: 8,
      step: 2,
      ticks: [0, 2, 4, 6, 8],
      decimals: 0,
    });
  });

  it("niceTicks(-0.83, -0.35, 6): range 0.5, step 0.1, ticks -0.9..-0.3", () => {
    const t = niceTicks(-0.83, -0.35, 6);
    expect(t.ticks).toEqual([-0.9, -0.8, -0.7, -0.6, -0.5, -0.4, -0.3]);
    expect(t.decimals).toBe(1);
  });

  it("niceTicks(12, 12) widens a zero range by 10 % and niceTicks(0, 0) by 1", () => {
    // 10.8 .. 13.2: range nice(2.4) = 5, step nice(1) = 1 -> 10 .. 14.
    expect(niceTicks(12, 12, 6).ticks).toEqual([10, 11, 12, 13, 14]);
    expect(niceTicks(0, 0, 6).ticks).toEqual([-1, -0.5, 0, 0.5, 1]);
    expect(() => niceTicks(0, Number.NaN)).toThrowError(/not finite/);
  });
});

describe("linePlot / scatterPlot", () => {
  it("linePlot points map back to the data through the tick labels", () => {
    const a: [number, number][] = [
      [0, 0.1],
      [1, 0.45],
      [2.5, 0.8],
      [4, 0.95],
    ];
    const b: [number, number][] = [
      [0, 0.05],
      [2, 0.3],
      [4, 0.6],
    ];
    const svg = linePlot({
      xLabel: "severity (0..1)",
      yLabel: "success rate",
      series: [
        { name: "masked", points: a, markers: true },
        { name: "unmasked", points: b, markers: true },
      ],
    });
    const x = axisMap(svg, "x");
    const y = axisMap(svg, "y");
    const lines = polylines(svg);
    expect(lines.length).toBe(2);
    expectAllClose(
      lines[0].flatMap(([px, py]) => [x.toData(px), y.toData(py)]),
      a.flat(),
      0.01,
      "series a",
    );
    expectAllClose(
      lines[1].flatMap(([px, py]) => [x.toData(px), y.toData(py)]),
      b.flat(),
      0.01,
      "series b",
    );
    // Axis covers the data with nice ends.
    expect(x.ticks[0]).toBe(0);
    expect(x.ticks[x.ticks.length - 1]).toBe(4);
    expect(svg).toContain(">severity (0..1)</text>");
    expect(svg).toContain('data-series="unmasked"');
    // One marker per point, circles for series 1, squares for series 2 (shape differs without colour).
    expect([...svg.matchAll(/<circle class="marker"/g)].length).toBe(4 + 1); // + 1 legend marker
    expect([...svg.matchAll(/<rect class="marker"/g)].length).toBe(3 + 1);
  });

  it("a non-finite point breaks the line into two runs", () => {
    const svg = linePlot({
      xLabel: "x",
      yLabel: "y",
      series: [
        {
          name: "s",
          points: [
            [0, 1],
            [1, 2],
            [2, Number.NaN],
            [3, 1],
            [4, 0],
          ],
        },
      ],
    });
    expect(polylines(svg).map((l) => l.length)).toEqual([2, 2]);
  });

  it("scatterPlot markers sit at the data positions", () => {
    const pts: [number, number][] = [
      [1, 0.2],
      [3, 1.7],
      [7.5, 4.2],
    ];
    const svg = scatterPlot({
      xLabel: "starting offset (mm)",
      yLabel: "error (mm)",
      series: [{ name: "trials", points: pts }],
    });
    const x = axisMap(svg, "x");
    const y = axisMap(svg, "y");
    const circles = [...svg.matchAll(/<circle class="marker" cx="([^"]+)" cy="([^"]+)"/g)]
      .map((m) => [x.toData(Number(m[1])), y.toData(Number(m[2]))])
      .slice(0, 3);
    expectAllClose(circles.flat(), pts.flat(), 0.01, "scatter");
    expect(polylines(svg)).toEqual([]);
  });

  it("reference lines are drawn at their data value and labels are escaped", () => {
    const svg = linePlot({
      xLabel: "x <mm>",
      yLabel: "y",
      series: [
        {
          name: "<script>",
          points: [
            [0, 0],
            [10, 5],
          ],
        },
      ],
      referenceLines: [{ axis: "y", value: 2, label: "2 mm" }],
    });
    expect(svg).not.toContain("<script>");
    expect(svg).toContain("&lt;script&gt;");
    expect(svg).toContain("x &lt;mm&gt;");
    const y = axisMap(svg, "y");
    const m = svg.match(/<g class="reference" data-axis="y" data-value="2"><line [^>]*y1="([^"]+)"/);
    expect(m).not.toBeNull();
    expect(y.toData(Number(m![1]))).toBeCloseTo(2, 2);
  });
});

describe("histogramPlot", () => {
  it("histogramBins([0.5, 1.2, 1.9, 2.5, 3.7, 4.1], 1) counts 1, 2, 1, 1, 1 from 0 (by hand)", () => {
    expect(histogramBins([0.5, 1.2, 1.9, 2.5, 3.7, 4.1, Number.NaN], 1)).toEqual({
      start: 0,
      width: 1,
      counts: [1, 2, 1, 1, 1],
    });
    // The maximum on a bin edge goes into the last bin.
    expect(histogramBins([0, 1, 2], 1).counts).toEqual([1, 2]);
    expect(() => histogramBins([1], 0)).toThrowError(/not positive/);
  });

  it("bar heights read back as counts through the y ticks, threshold lines sit at 2 and 4 mm", () => {
    const values = [0.3, 0.6, 0.7, 1.1, 1.4, 1.45, 1.8, 2.2, 2.9, 4.6];
    const svg = histogramPlot({
      xLabel: "TRE (mm)",
      yLabel: "cases",
      values,
      binWidth: 0.5,
      referenceLines: [
        { axis: "x", value: 2, label: "2 mm" },
        { axis: "x", value: 4, label: "4 mm" },
      ],
    });
    const x = axisMap(svg, "x");
    const y = axisMap(svg, "y");
    expect(y.ticks[0]).toBe(0);
    const bars = [
      ...svg.matchAll(
        /<rect class="bar" data-x0="([^"]+)" data-x1="([^"]+)" data-count="(\d+)" x="([^"]+)" y="([^"]+)" width="([^"]+)" height="([^"]+)"/g,
      ),
    ];
    // Bins of 0.5 mm from 0: [0,0.5) 1, [0.5,1) 2, [1,1.5) 3, [1.5,2) 1, [2,2.5) 1, [2.5,3) 1, ..., [4.5,5) 1
    expect(bars.map((b) => Number(b[3]))).toEqual([1, 2, 3, 1, 1, 1, 0, 0, 0, 1]);
    for (const b of bars) {
      const top = Number(b[5]);
      const bottom = top + Number(b[7]);
      expect(y.toData(top) - y.toData(bottom)).toBeCloseTo(Number(b[3]), 2);
      expect(x.toData(Number(b[4]) - 0.5)).toBeCloseTo(Number(b[1]), 2);
    }
    for (const v of [2, 4]) {
      const m = svg.match(
        new RegExp(`<g class="reference" data-axis="x" data-value="${v}"><line x1="([^"]+)"`),
      );
      expect(x.toData(Number(m![1]))).toBeCloseTo(v, 2);
    }
    expect([...svg.matchAll(/<g class="rug">/g)].length).toBe(1);
  });

  it("histogramPlot of no values says so", () => {
    expect(histogramPlot({ xLabel: "TRE (mm)", yLabel: "cases", values: [] })).toContain(">no data</text>");
  });
});

describe("metricTracePlot", () => {
  it("one series per level, evaluations counted across levels", () => {
    const svg = metricTracePlot(
      [
        { level: 1, stepMm: 4, values: [-0.5, -0.6] },
        { level: 0, stepMm: 8, values: [-0.2, -0.3, -0.4] },
      ],
      "mi",
    );
    const x = axisMap(svg, "x");
    const y = axisMap(svg, "y");
    const lines = polylines(svg);
    expect(lines.length).toBe(2);
    expectAllClose(
      lines[0].flatMap(([px, py]) => [x.toData(px), y.toData(py)]),
      [1, -0.2, 2, -0.3, 3, -0.4],
      0.01,
      "level 1",
    );
    expectAllClose(
      lines[1].flatMap(([px, py]) => [x.toData(px), y.toData(py)]),
      [4, -0.5, 5, -0.6],
      0.01,
      "level 2",
    );
    expect(svg).toContain(">level 1 (8 mm)</text>");
    expect(svg).toContain(">level 2 (4 mm)</text>");
    expect(svg).toContain("mi (lower is better)");
    expect(svg).not.toMatch(/<script|href=/);
  });
});
