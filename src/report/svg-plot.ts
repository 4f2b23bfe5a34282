/**
 * Inline SVG plots for the reports: line plots with named series, scatter plots, histograms with
 * threshold lines, and the optimiser trace of a registration. The output is a self-contained
 * `<svg>` element: presentation attributes only (no CSS classes needed, no scripts, no external
 * fonts), a `<title>` for screen readers, readable without JS and in print.
 *
 * Coordinates: data (x, y) maps linearly to SVG user units, x to the right, y upwards on screen
 * (SVG y grows downwards, so y_svg = top + height * (1 - (y - yMin) / (yMax - yMin))).
 * Axis ranges are widened to "nice" tick values with the loose labelling algorithm of Heckbert
 * (1990), "Nice numbers for graph labels", Graphics Gems I, pp. 61-63: steps 1, 2 or 5 x 10^k.
 * Tick labels carry their value in `data-value` so the plot can be checked by parsing it.
 */
import { CoxaError } from "../common/errors.js";

/** A named set of (x, y) points. */
export interface PlotSeries {
  /** Legend name. */
  name: string;
  /** Points in data units; non-finite points are skipped (and break a line). */
  points: readonly (readonly [number, number])[];
  /** Draw a marker at every point (default: true for scatter, false for line plots). */
  markers?: boolean;
}

/** A horizontal or vertical reference line at a data value, with a label. */
export interface ReferenceLine {
  /** "x": vertical line at x = value; "y": horizontal line at y = value. */
  axis: "x" | "y";
  value: number;
  label: string;
}

/** Options common to all plots. */
export interface PlotFrameOptions {
  /** Heading drawn above the plot area (also the accessible name). */
  title?: string;
  /** X axis label, with unit, e.g. "starting offset (mm)". */
  xLabel: string;
  /** Y axis label, with unit. */
  yLabel: string;
  /** Total size in SVG user units (= CSS px at 100 %); defaults 640 x 320. */
  width?: number;
  height?: number;
  /** Fixed axis ranges (widened to nice ticks); default: from the data. */
  xDomain?: readonly [number, number];
  yDomain?: readonly [number, number];
  /** Include 0 in the y range (default false; histograms always start at 0). */
  yFromZero?: boolean;
  /** Reference lines drawn dashed with their labels. */
  referenceLines?: readonly ReferenceLine[];
  /** Approximate number of ticks per axis (default 6). */
  tickCount?: number;
}

/** Options of linePlot and scatterPlot. */
export interface SeriesPlotOptions extends PlotFrameOptions {
  series: readonly PlotSeries[];
}

/** Options of histogramPlot. */
export interface HistogramOptions extends PlotFrameOptions {
  /** The values to count (non-finite values are ignored). */
  values: readonly number[];
  /** Bin width in x units (default: a nice width for about sqrt(n) bins, 5..30 bins). */
  binWidth?: number;
  /** Draw a short tick under the bars for every value (default true). */
  rug?: boolean;
}

/** One pyramid level of an optimiser trace. */
export interface MetricTraceLevel {
  /** Level index, 0 = coarsest. */
  level: number;
  /** Sampling step of the level in mm. */
  stepMm: number;
  /** Metric value after each optimiser evaluation of this level, in order. */
  values: readonly number[];
}

/** Ticks chosen for one axis. */
export interface NiceTicks {
  /** Axis range, a multiple of `step` at both ends, covering the requested range. */
  min: number;
  max: number;
  /** Tick spacing: 1, 2 or 5 x 10^k. */
  step: number;
  /** Tick values from min to max inclusive. */
  ticks: number[];
  /** Decimals needed to print the ticks exactly. */
  decimals: number;
}

/** Series colours of our palette, with dash patterns and marker shapes so they also differ without colour. */
const SERIES_STYLES: readonly { colour: string; dash: string; marker: MarkerShape }[] = [
  { colour: "#1d5f7a", dash: "", marker: "circle" },
  { colour: "#b8572a", dash: "7 3", marker: "square" },
  { colour: "#5b7f2b", dash: "2 3", marker: "triangle" },
  { colour: "#7b4a8e", dash: "9 3 2 3", marker: "diamond" },
  { colour: "#8a6d1d", dash: "4 2", marker: "cross" },
  { colour: "#2f4858", dash: "1 2", marker: "circle" },
];

type MarkerShape = "circle" | "square" | "triangle" | "diamond" | "cross";

const INK = "#27323a";
const GRID = "#d9dde0";
const REFERENCE = "#9a3b3b";
const FONT = "font-family=\"system-ui, -apple-system, 'Segoe UI', sans-serif\"";

function niceNumber(x: number, round: boolean): number {
  const exponent = Math.floor(Math.log10(x));
  const fraction = x / 10 ** exponent;
  let nice: number;
  if (round) nice = fraction < 1.5 ? 1 : fraction < 3 ? 2 : fraction < 7 ? 5 : 10;
  else nice = fraction <= 1 ? 1 : fraction <= 2 ? 2 : fraction <= 5 ? 5 : 10;
  return nice * 10 ** exponent;
}

/**
 * Nice axis ticks covering [lo, hi] (Heckbert 1990, loose labelling). A zero-width range is
 * widened by 10 % of its value (or by 1 around 0).
 * @param lo - smallest data value
 * @param hi - largest data value
 * @param count - desired number of ticks (>= 2)
 * @throws CoxaError BAD_ARGUMENT for non-finite bounds
 */
export function niceTicks(lo: number, hi: number, count = 6): NiceTicks {
  if (!Number.isFinite(lo) || !Number.isFinite(hi)) {
    throw new CoxaError("BAD_ARGUMENT", `axis range ${lo}..${hi} is not finite`);
  }
  if (hi < lo) [lo, hi] = [hi, lo];
  if (hi === lo) {
    const pad = lo === 0 ? 1 : Math.abs(lo) * 0.1;
    lo -= pad;
    hi += pad;
  }
  const n = Math.max(2, Math.round(count));
  const range = niceNumber(hi - lo, false);
  const step = niceNumber(range / (n - 1), true);
  const decimals = Math.max(0, -Math.floor(Math.log10(step) + 1e-9));
  const min = Math.floor(lo / step + 1e-9) * step;
  const max = Math.ceil(hi / step - 1e-9) * step;
  const ticks: number[] = [];
  const k = Math.round((max - min) / step);
  for (let i = 0; i <= k; i++) ticks.push(Number((min + i * step).toFixed(decimals)) + 0);
  return { min: ticks[0], max: ticks[ticks.length - 1], step, ticks, decimals };
}

/** Escape text for SVG/HTML content and attribute values. */
export function escapeXml(text: string): string {
  return text
    .replace(/&/g, "&amp;")
    .replace(/</g, "&lt;")
    .replace(/>/g, "&gt;")
    .replace(/"/g, "&quot;")
    .replace(/'/g, "&#39;");
}

function fmt(v: number): string {
  return (Math.round(v * 100) / 100).toString();
}

function tickLabel(v: number, decimals: number): string {
  const s = v.toFixed(decimals);
  return s === "-0" || /^-0\.0*$/.test(s) ? s.slice(1) : s.replace("-", "\u2212");
}

interface Frame {
  width: number;
  height: number;
  left: number;
  top: number;
  plotW: number;
  plotH: number;
  x: NiceTicks;
  y: NiceTicks;
  px: (x: number) => number;
  py: (y: number) => number;
}

function buildFrame(
  options: PlotFrameOptions,
  xs: readonly number[],
  ys: readonly number[],
  legendWidth: number,
): Frame {
  const width = options.width ?? 640;
  const height = options.height ?? 320;
  const left = 68;
  const right = 18 + legendWidth;
  const top = options.title ? 34 : 14;
  const bottom = 50;
  const plotW = Math.max(40, width - left - right);
  const plotH = Math.max(40, height - top - bottom);
  const count = options.tickCount ?? 6;
  const refX = (options.referenceLines ?? []).filter((r) => r.axis === "x").map((r) => r.value);
  const refY = (options.referenceLines ?? []).filter((r) => r.axis === "y").map((r) => r.value);
  const xRange = options.xDomain ?? finiteRange([...xs, ...refX]);
  let yRange = options.yDomain ?? finiteRange([...ys, ...refY]);
  if (options.yFromZero) yRange = [Math.min(0, yRange[0]), Math.max(0, yRange[1])];
  const x = niceTicks(xRange[0], xRange[1], count);
  const y = niceTicks(yRange[0], yRange[1], count);
  return {
    width,
    height,
    left,
    top,
    plotW,
    plotH,
    x,
    y,
    px: (v) => left + ((v - x.min) / (x.max - x.min)) * plotW,
    py: (v) => top + plotH * (1 - (v - y.min) / (y.max - y.min)),
  };
}

function finiteRange(values: readonly number[]): [number, number] {
  let lo = Infinity;
  let hi = -Infinity;
  for (const v of values) {
    if (!Number.isFinite(v)) continue;
    if (v < lo) lo = v;
    if (v > hi) hi = v;
  }
  return lo <= hi ? [lo, hi] : [0, 1];
}

function openSvg(frame: Frame, options: PlotFrameOptions, description: string): string[] {
  const title = options.title ?? `${options.yLabel} against ${options.xLabel}`;
  const parts = [
    `<svg xmlns="http://www.w3.org/2000/svg" class="coxa-plot" viewBox="0 0 ${frame.width} ${frame.height}" width="${frame.width}" height="${frame.height}" role="img" ${FONT} font-size="12">`,
    `<title>${escapeXml(title)}</title>`,
    `<desc>${escapeXml(description)}</desc>`,
    `<rect x="0" y="0" width="${frame.width}" height="${frame.height}" fill="#ffffff"/>`,
  ];
  if (options.title) {
    parts.push(
      `<text x="${frame.left}" y="20" fill="${INK}" font-size="14" font-weight="600">${escapeXml(options.title)}</text>`,
    );
  }
  return parts;
}

function axes(frame: Frame, options: PlotFrameOptions): string[] {
  const { left, top, plotW, plotH } = frame;
  const bottomY = top + plotH;
  const parts: string[] = ['<g class="axes">'];
  for (const t of frame.y.ticks) {
    const y = fmt(frame.py(t));
    parts.push(
      `<line x1="${left}" x2="${fmt(left + plotW)}" y1="${y}" y2="${y}" stroke="${GRID}" stroke-width="1"/>`,
    );
    parts.push(
      `<text class="tick-y" data-value="${t}" x="${left - 7}" y="${y}" text-anchor="end" dominant-baseline="middle" fill="${INK}">${tickLabel(t, frame.y.decimals)}</text>`,
    );
  }
  for (const t of frame.x.ticks) {
    const x = fmt(frame.px(t));
    parts.push(
      `<line x1="${x}" x2="${x}" y1="${top}" y2="${fmt(bottomY)}" stroke="${GRID}" stroke-width="1"/>`,
    );
    parts.push(
      `<text class="tick-x" data-value="${t}" x="${x}" y="${fmt(bottomY + 17)}" text-anchor="middle" fill="${INK}">${tickLabel(t, frame.x.decimals)}</text>`,
    );
  }
  parts.push(
    `<rect x="${left}" y="${top}" width="${fmt(plotW)}" height="${fmt(plotH)}" fill="none" stroke="${INK}" stroke-width="1"/>`,
  );
  parts.push(
    `<text class="label-x" x="${fmt(left + plotW / 2)}" y="${fmt(bottomY + 38)}" text-anchor="middle" fill="${INK}">${escapeXml(options.xLabel)}</text>`,
  );
  const cy = fmt(top + plotH / 2);
  parts.push(
    `<text class="label-y" x="16" y="${cy}" transform="rotate(-90 16 ${cy})" text-anchor="middle" fill="${INK}">${escapeXml(options.yLabel)}</text>`,
  );
  parts.push("</g>");
  return parts;
}

function referenceLines(frame: Frame, lines: readonly ReferenceLine[]): string[] {
  const parts: string[] = [];
  for (const line of lines) {
    if (!Number.isFinite(line.value)) continue;
    if (line.axis === "x") {
      const x = fmt(frame.px(line.value));
      parts.push(
        `<g class="reference" data-axis="x" data-value="${line.value}"><line x1="${x}" x2="${x}" y1="${frame.top}" y2="${fmt(frame.top + frame.plotH)}" stroke="${REFERENCE}" stroke-width="1.5" stroke-dasharray="5 4"/>` +
          `<text x="${fmt(frame.px(line.value) + 4)}" y="${frame.top + 13}" fill="${REFERENCE}">${escapeXml(line.label)}</text></g>`,
      );
    } else {
      const y = fmt(frame.py(line.value));
      parts.push(
        `<g class="reference" data-axis="y" data-value="${line.value}"><line x1="${frame.left}" x2="${fmt(frame.left + frame.plotW)}" y1="${y}" y2="${y}" stroke="${REFERENCE}" stroke-width="1.5" stroke-dasharray="5 4"/>` +
          `<text x="${fmt(frame.left + frame.plotW - 4)}" y="${fmt(frame.py(line.value) - 5)}" text-anchor="end" fill="${REFERENCE}">${escapeXml(line.label)}</text></g>`,
      );
    }
  }
  return parts;
}

function marker(shape: MarkerShape, x: number, y: number, colour: string, size = 3.5): string {
  const cx = fmt(x);
  const cy = fmt(y);
  switch (shape) {
    case "circle":
      return `<circle class="marker" cx="${cx}" cy="${cy}" r="${size}" fill="${colour}"/>`;
    case "square":
      return `<rect class="marker" data-cx="${cx}" data-cy="${cy}" x="${fmt(x - size)}" y="${fmt(y - size)}" width="${fmt(2 * size)}" height="${fmt(2 * size)}" fill="${colour}"/>`;
    case "triangle":
      return `<path class="marker" data-cx="${cx}" data-cy="${cy}" d="M${fmt(x)} ${fmt(y - size * 1.2)}L${fmt(x + size * 1.1)} ${fmt(y + size * 0.8)}L${fmt(x - size * 1.1)} ${fmt(y + size * 0.8)}Z" fill="${colour}"/>`;
    case "diamond":
      return `<path class="marker" data-cx="${cx}" data-cy="${cy}" d="M${fmt(x)} ${fmt(y - size * 1.3)}L${fmt(x + size * 1.3)} ${fmt(y)}L${fmt(x)} ${fmt(y + size * 1.3)}L${fmt(x - size * 1.3)} ${fmt(y)}Z" fill="${colour}"/>`;
    default:
      return `<path class="marker" data-cx="${cx}" data-cy="${cy}" d="M${fmt(x - size)} ${fmt(y - size)}L${fmt(x + size)} ${fmt(y + size)}M${fmt(x - size)} ${fmt(y + size)}L${fmt(x + size)} ${fmt(y - size)}" stroke="${colour}" stroke-width="2" fill="none"/>`;
  }
}

function legend(
  frame: Frame,
  names: readonly string[],
  withLines: boolean,
  withMarkers: boolean[],
): string[] {
  if (names.length === 0) return [];
  const x0 = frame.left + frame.plotW + 14;
  const parts = ['<g class="legend">'];
  for (let s = 0; s < names.length; s++) {
    const style = SERIES_STYLES[s % SERIES_STYLES.length];
    const y = frame.top + 10 + s * 20;
    if (withLines) {
      parts.push(
        `<line x1="${x0}" x2="${x0 + 24}" y1="${y}" y2="${y}" stroke="${style.colour}" stroke-width="2"${style.dash ? ` stroke-dasharray="${style.dash}"` : ""}/>`,
      );
    }
    if (withMarkers[s]) parts.push(marker(style.marker, x0 + 12, y, style.colour));
    parts.push(
      `<text x="${x0 + 30}" y="${y}" dominant-baseline="middle" fill="${INK}">${escapeXml(names[s])}</text>`,
    );
  }
  parts.push("</g>");
  return parts;
}

function legendWidthFor(names: readonly string[]): number {
  if (names.length === 0) return 0;
  const longest = Math.max(...names.map((n) => n.length));
  return Math.min(220, 42 + longest * 6.8);
}

function seriesPlot(options: SeriesPlotOptions, lines: boolean): string {
  const xs: number[] = [];
  const ys: number[] = [];
  for (const s of options.series) {
    for (const [x, y] of s.points) {
      if (Number.isFinite(x) && Number.isFinite(y)) {
        xs.push(x);
        ys.push(y);
      }
    }
  }
  const names = options.series.map((s) => s.name);
  const frame = buildFrame(options, xs, ys, legendWidthFor(names));
  const description = `${lines ? "Line" : "Scatter"} plot of ${options.series.length} series, ${xs.length} points; x: ${options.xLabel}; y: ${options.yLabel}.`;
  const parts = openSvg(frame, options, description);
  parts.push(...axes(frame, options));
  parts.push(...referenceLines(frame, options.referenceLines ?? []));
  const withMarkers: boolean[] = [];
  for (let s = 0; s < options.series.length; s++) {
    const series = options.series[s];
    const style = SERIES_STYLES[s % SERIES_STYLES.length];
    const showMarkers = series.markers ?? !lines;
    withMarkers.push(showMarkers);
    parts.push(`<g class="series" data-series="${escapeXml(series.name)}">`);
    if (lines) {
      // Non-finite points break the line into separate runs.
      let run: string[] = [];
      const flush = () => {
        if (run.length > 0) {
          parts.push(
            `<polyline class="series-line" points="${run.join(" ")}" fill="none" stroke="${style.colour}" stroke-width="2" stroke-linejoin="round"${style.dash ? ` stroke-dasharray="${style.dash}"` : ""}/>`,
          );
        }
        run = [];
      };
      for (const [x, y] of series.points) {
        if (Number.isFinite(x) && Number.isFinite(y)) run.push(`${fmt(frame.px(x))},${fmt(frame.py(y))}`);
        else flush();
      }
      flush();
    }
    if (showMarkers) {
      for (const [x, y] of series.points) {
        if (Number.isFinite(x) && Number.isFinite(y))
          parts.push(marker(style.marker, frame.px(x), frame.py(y), style.colour));
      }
    }
    parts.push("</g>");
  }
  if (xs.length === 0) parts.push(noData(frame));
  parts.push(...legend(frame, names, lines, withMarkers));
  parts.push("</svg>");
  return parts.join("");
}

function noData(frame: Frame): string {
  return `<text x="${fmt(frame.left + frame.plotW / 2)}" y="${fmt(frame.top + frame.plotH / 2)}" text-anchor="middle" fill="${INK}">no data</text>`;
}

/**
 * A line plot with one or more named series (lines, optional markers), axis labels, legend and
 * reference lines.
 * @param options - series and frame options
 * @returns an `<svg>` element as text
 * @throws CoxaError BAD_ARGUMENT for a fixed domain that is not finite
 */
export function linePlot(options: SeriesPlotOptions): string {
  return seriesPlot(options, true);
}

/**
 * A scatter plot (markers only), e.g. registration error against starting offset.
 * @param options - series and frame options
 * @returns an `<svg>` element as text
 */
export function scatterPlot(options: SeriesPlotOptions): string {
  return seriesPlot(options, false);
}

/** Histogram bins: counts of values in [start + b * width, start + (b + 1) * width). */
export interface HistogramBins {
  start: number;
  width: number;
  counts: number[];
}

/**
 * Count finite values into bins of `binWidth` aligned to multiples of the width; the largest
 * value goes into the last bin even when it sits on a bin edge.
 * @param values - data
 * @param binWidth - width in data units (default: nice width for about sqrt(n) bins, 5..30)
 * @throws CoxaError BAD_ARGUMENT for a bin width that is not positive
 */
export function histogramBins(values: readonly number[], binWidth?: number): HistogramBins {
  const finite = values.filter((v) => Number.isFinite(v));
  if (binWidth !== undefined && !(binWidth > 0 && Number.isFinite(binWidth))) {
    throw new CoxaError("BAD_ARGUMENT", `histogram bin width ${binWidth} is not positive`);
  }
  if (finite.length === 0) return { start: 0, width: binWidth ?? 1, counts: [] };
  const [lo, hi] = finiteRange(finite);
  const wanted = Math.min(30, Math.max(5, Math.round(Math.sqrt(finite.length))));
  const width = binWidth ?? niceTicks(lo, hi, wanted + 1).step;
  const start = Math.floor(lo / width + 1e-9) * width;
  const nBins = Math.max(1, Math.ceil((hi - start) / width - 1e-9) + (hi === start ? 1 : 0));
  const counts = new Array<number>(nBins).fill(0);
  for (const v of finite) {
    let b = Math.floor((v - start) / width + 1e-9);
    if (b >= nBins) b = nBins - 1;
    if (b < 0) b = 0;
    counts[b]++;
  }
  return { start, width, counts };
}

/**
 * A histogram (bar per bin, y from 0) with optional reference lines (e.g. TRE thresholds at 2
 * and 4 mm) and a rug of the individual values.
 * @param options - values, bin width and frame options
 * @returns an `<svg>` element as text
 */
export function histogramPlot(options: HistogramOptions): string {
  const bins = histogramBins(options.values, options.binWidth);
  const end = bins.start + bins.width * bins.counts.length;
  const maxCount = bins.counts.length > 0 ? Math.max(...bins.counts) : 1;
  const frame = buildFrame({ ...options, yFromZero: true }, [bins.start, end], [0, maxCount], 0);
  const n = bins.counts.reduce((a, b) => a + b, 0);
  const parts = openSvg(
    frame,
    options,
    `Histogram of ${n} values in ${bins.counts.length} bins of width ${bins.width}; x: ${options.xLabel}; y: ${options.yLabel}.`,
  );
  parts.push(...axes(frame, options));
  parts.push('<g class="bars">');
  for (let b = 0; b < bins.counts.length; b++) {
    const x0 = bins.start + b * bins.width;
    const x1 = x0 + bins.width;
    const left = frame.px(x0);
    const top = frame.py(bins.counts[b]);
    parts.push(
      `<rect class="bar" data-x0="${Number(x0.toFixed(12))}" data-x1="${Number(x1.toFixed(12))}" data-count="${bins.counts[b]}" x="${fmt(left + 0.5)}" y="${fmt(top)}" width="${fmt(Math.max(0, frame.px(x1) - left - 1))}" height="${fmt(frame.py(0) - top)}" fill="#7fa7b8" stroke="#1d5f7a" stroke-width="1"/>`,
    );
  }
  parts.push("</g>");
  if (options.rug ?? true) {
    parts.push('<g class="rug">');
    const base = frame.top + frame.plotH;
    for (const v of options.values) {
      if (!Number.isFinite(v)) continue;
      const x = fmt(frame.px(v));
      parts.push(
        `<line x1="${x}" x2="${x}" y1="${fmt(base - 7)}" y2="${fmt(base)}" stroke="${INK}" stroke-width="1"/>`,
      );
    }
    parts.push("</g>");
  }
  parts.push(...referenceLines(frame, options.referenceLines ?? []));
  if (n === 0) parts.push(noData(frame));
  parts.push("</svg>");
  return parts.join("");
}

/**
 * The optimiser trace of a multiresolution registration: metric value against optimiser
 * evaluation, counted across all levels (level 2 continues where level 1 stopped), one series
 * per level.
 * @param levels - per level: index, sampling step (mm) and metric values in evaluation order
 * @param metricName - e.g. "mi"; shown in the y label
 * @param lowerIsBetter - true (default) when the optimiser minimises the plotted value
 * @param options - size or title overrides
 * @returns an `<svg>` element as text
 */
export function metricTracePlot(
  levels: readonly MetricTraceLevel[],
  metricName: string,
  lowerIsBetter = true,
  options: Partial<PlotFrameOptions> = {},
): string {
  let offset = 0;
  const series: PlotSeries[] = [];
  const ordered = [...levels].sort((a, b) => a.level - b.level);
  for (const lvl of ordered) {
    const points: [number, number][] = lvl.values.map((v, i) => [offset + i + 1, v]);
    offset += lvl.values.length;
    series.push({
      name: `level ${lvl.level + 1} (${Number(lvl.stepMm.toPrecision(3))} mm)`,
      points,
      markers: lvl.values.length <= 40,
    });
  }
  return linePlot({
    title: options.title ?? "Metric per optimiser evaluation",
    xLabel: options.xLabel ?? "optimiser evaluation (counted across levels)",
    yLabel: options.yLabel ?? `${metricName} (${lowerIsBetter ? "lower" : "higher"} is better)`,
    width: options.width ?? 720,
    height: options.height ?? 320,
    series,
    ...(options.referenceLines ? { referenceLines: options.referenceLines } : {}),
  });
}
