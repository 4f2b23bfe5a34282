/**
 * The `coxa align` report: one self-contained, offline HTML page that shows a person whether an
 * MR-to-CT alignment can be trusted. Order: verdict and reasons, the "use with care" note,
 * inputs, transform, image panels (two points x three planes x four views), optimiser trace,
 * landmark table, Dice table, consistency and overlap, timings, software.
 *
 * Conventions (design.md): world = RAS+ mm; the transform maps FIXED world to MOVING world
 * (x_moving = T x_fixed); `movingOnFixed` is the moving image resampled onto the fixed grid
 * (moving evaluated at T(x) for every fixed voxel centre x), so every panel is on the fixed grid.
 * Landmark positions shown on the panels are in the fixed world: fixed landmarks as they are,
 * moving landmarks mapped back with the inverse transform.
 */
import { writeFileAtomic } from "../common/atomic.js";
import { CoxaError } from "../common/errors.js";
import { softwareInfo } from "../common/version.js";
import type { Modality } from "../image/modality.js";
import type { Volume } from "../image/volume.js";
import {
  careNote,
  escapeHtml,
  formatNumber,
  html,
  PALETTE,
  renderKeyValueTable,
  renderMatrix,
  renderPage,
  renderTable,
  section,
  type Verdict,
  verdictBanner,
} from "./html.js";
import { type PanelLandmark, type PlanePanelInput, panelNames, renderPlanePanels } from "./panels.js";
import { choosePoints, type PointOfInterest, type Vec3Mm } from "./points.js";
import { DISPLAY_CONVENTION, PLANES } from "./slice.js";
import { type MetricTraceLevel, metricTracePlot } from "./svg-plot.js";
import { ctWindow, type IntensityWindow, percentileWindow } from "./window.js";

/** What the report says about one input image. */
export interface ReportImageInfo {
  path: string;
  /** Hex SHA-256 of the file. */
  sha256: string;
  /** Voxels per axis [nx, ny, nz]. */
  shape: readonly number[];
  /** Voxel spacing in mm along i, j, k. */
  spacingMm: readonly number[];
  /** Orientation code, e.g. "LPS". */
  orientation: string;
  /** Stored datatype, e.g. "int16". */
  datatype: string;
  /** Detected or declared modality. */
  modality: Modality;
  /** One sentence: why the image looked like CT (or not), or that the user declared it. */
  modalityReason: string;
}

/** One landmark pair. */
export interface ReportLandmark {
  label: string;
  /** Fixed landmark, fixed world RAS mm. */
  fixedMm: Vec3Mm;
  /** Moving landmark mapped into the fixed world with the inverse transform, RAS mm. */
  mappedMovingMm?: Vec3Mm;
  /** Residual distance at this landmark in mm (|T(fixed) - moving|). */
  errorMm: number;
  /** Predicted TRE at this point in mm (Fitzpatrick-West model), when known. */
  predictedTreMm?: number;
}

/** Dice overlap of one propagated label. */
export interface ReportDice {
  /** Label value in the label maps. */
  label: number;
  /** Human name, when known. */
  name?: string;
  /** Dice coefficient 0..1. */
  dice: number;
  /** Voxels of the label in the fixed and in the propagated moving label map, when known. */
  fixedVoxels?: number;
  movingVoxels?: number;
}

/** Everything the align report shows. Values come from the registration; nothing is recomputed except the display. */
export interface AlignReportInput {
  /** Page title; default "coxa alignment report". */
  title?: string;
  verdict: Verdict;
  /** Plain sentences explaining the verdict (shown first). */
  reasons: readonly string[];
  fixed: {
    /** The fixed image as read (intensities in HU when it is CT). */
    volume: Volume;
    path: string;
    sha256: string;
    modality: Modality;
    modalityReason: string;
    /** Stored datatype when it differs from the volume's typed array (e.g. after scaling). */
    datatype?: string;
  };
  /** The moving image as given on the command line (before resampling). */
  movingInfo: ReportImageInfo;
  /** The moving image resampled onto the fixed grid (same dims and affine as fixed.volume). */
  movingOnFixed: Volume;
  /** Metal mask on the fixed grid (non-zero = metal), when one was used. */
  metalMask?: Uint8Array;
  /** Voxels of `metalMask`, when the caller has counted them already. */
  metalVoxels?: number;
  /** Metal threshold used for the mask, HU. */
  metalHu?: number;
  /** Points to slice through (RAS mm, fixed world); missing ones are chosen from the metal mask. */
  pointsMm?: { implant?: Vec3Mm; otherHip?: Vec3Mm };
  landmarks?: readonly ReportLandmark[];
  /** Fiducial registration error (mm), when landmarks were used to fit or check. */
  freMm?: number;
  /** Landmark rows with an error above this (mm) are highlighted; default: none. */
  landmarkFlagMm?: number;
  dice?: readonly ReportDice[];
  /** Metric of the registration. */
  metric: { name: string; start?: number; final?: number; lowerIsBetter?: boolean };
  /** Metric value per optimiser evaluation, per pyramid level. */
  metricTrace: readonly MetricTraceLevel[];
  transform: {
    model: string;
    /** 4x4 rows, fixed world -> moving world. */
    matrix: readonly (readonly number[])[];
    /** 4x4 rows, moving world -> fixed world. */
    inverse?: readonly (readonly number[])[];
    /** Model parameters, e.g. center_mm, rotation_deg, translation_mm. */
    parameters: Readonly<Record<string, number | readonly number[]>>;
  };
  /** Seconds per stage (e.g. read, register, resample, report); "total" when known. */
  timings: Readonly<Record<string, number>>;
  /** Share of the metric's samples that landed inside the other image's body, 0..1. */
  overlapFraction?: number;
  /** Largest disagreement (mm) in the implant region with the answer found sampling the other image. */
  inverseConsistencyMm?: number;
  /** More labelled numbers or sentences for the quality section. */
  summaryExtra?: readonly (readonly [string, string | number])[];
  /** Defaults to this package's name and version. */
  software?: { name: string; version: string };
  /** Time stamp shown in the header (ISO 8601); omitted when not given, so pages are reproducible. */
  generatedAt?: string;
  /** Display choices. */
  display?: {
    /** Window for CT panels; default level 300 / width 1800 HU. */
    ctWindow?: IntensityWindow;
    /** Pixels of the longer side of a panel; default 300. */
    maxPanelPx?: number;
    /** Checkerboard tile size, mm; default 20. */
    checkerTileMm?: number;
    /** Landmarks within ± this many mm of a plane are marked; default 4. */
    landmarkSlabMm?: number;
    /** Edge strength percentile 0..100; default 85. */
    edgePercentile?: number;
  };
}

function modalityName(m: Modality): string {
  return m === "ct" ? "CT" : m === "mr" ? "MR" : "image";
}

function validate(input: AlignReportInput): void {
  if (!["pass", "review", "fail"].includes(input.verdict)) {
    throw new CoxaError("BAD_ARGUMENT", `report verdict "${input.verdict}" is not pass, review or fail`);
  }
  const rows = input.transform.matrix;
  if (rows.length < 3 || rows.some((r) => r.length !== 4 || r.some((v) => !Number.isFinite(v)))) {
    throw new CoxaError("BAD_ARGUMENT", "report transform matrix must have 3 or 4 rows of 4 finite numbers");
  }
}

function fmtVec(v: readonly number[] | undefined, decimals = 2): string {
  return v ? `(${v.map((x) => formatNumber(x, decimals)).join(", ")})` : "\u2013";
}

function inputsSection(input: AlignReportInput): string {
  const f = input.fixed;
  const v = f.volume;
  const m = input.movingInfo;
  const rows: [string, string, string][] = [
    ["role", "fixed (the grid everything is shown on)", "moving (resampled onto the fixed grid)"],
    ["path", f.path, m.path],
    ["shape (voxels)", v.dims.join(" \u00d7 "), m.shape.join(" \u00d7 ")],
    [
      "spacing (mm)",
      v.spacingMm.map((s) => formatNumber(s, 3)).join(" \u00d7 "),
      m.spacingMm.map((s) => formatNumber(s, 3)).join(" \u00d7 "),
    ],
    ["orientation", v.orientation(), m.orientation],
    ["datatype", f.datatype ?? v.datatype, m.datatype],
    ["looks like", modalityName(f.modality), modalityName(m.modality)],
    ["why", f.modalityReason, m.modalityReason],
  ];
  const body = rows
    .map(
      ([k, a, b]) =>
        `<tr><th scope="row">${escapeHtml(k)}</th><td>${escapeHtml(a)}</td><td>${escapeHtml(b)}</td></tr>`,
    )
    .join("");
  const hashRow = `<tr><th scope="row">sha256</th><td class="hash">${escapeHtml(f.sha256)}</td><td class="hash">${escapeHtml(m.sha256)}</td></tr>`;
  const ctSentence =
    f.modality === "ct" && m.modality !== "ct"
      ? "The fixed image looked like CT: "
      : m.modality === "ct" && f.modality !== "ct"
        ? "The moving image looked like CT (a CT passed as moving is fine): "
        : f.modality === "ct" && m.modality === "ct"
          ? "Both images looked like CT."
          : "Neither image looked like CT; no HU metal mask applies.";
  const reason =
    f.modality === "ct" && m.modality !== "ct"
      ? f.modalityReason
      : m.modality === "ct" && f.modality !== "ct"
        ? m.modalityReason
        : "";
  return section(
    "inputs",
    "Inputs",
    `<p>${escapeHtml(ctSentence + reason)}</p><table class="data kv inputs"><thead><tr><th></th><th scope="col">fixed</th><th scope="col">moving</th></tr></thead><tbody>${body}${hashRow}</tbody></table>`,
  );
}

function transformSection(input: AlignReportInput): string {
  const t = input.transform;
  const params = Object.entries(t.parameters).map(
    ([k, val]) =>
      [
        k,
        typeof val === "number" ? formatNumber(val, 4) : `[${val.map((x) => formatNumber(x, 4)).join(", ")}]`,
      ] as [string, string],
  );
  const matrixRows = t.matrix.length === 3 ? [...t.matrix, [0, 0, 0, 1]] : t.matrix;
  return section(
    "transform",
    "Transform",
    `<p>Model <strong>${escapeHtml(t.model)}</strong>. The matrix maps a point of the fixed image's world to the matching point of the moving image's world (x<sub>moving</sub> = T \u00b7 x<sub>fixed</sub>, RAS mm).</p>` +
      `<h3>T: fixed \u2192 moving</h3>${renderMatrix(matrixRows, 6, "fixed to moving matrix")}` +
      (t.inverse
        ? `<h3>T\u207b\u00b9: moving \u2192 fixed</h3>${renderMatrix(t.inverse, 6, "moving to fixed matrix")}`
        : "") +
      (params.length > 0 ? renderKeyValueTable(params, "Parameters") : ""),
  );
}

function legendHtml(hasMask: boolean, hasLandmarks: boolean, names: Record<string, string>): string {
  const keys = [
    `<span class="key"><span class="swatch" style="background:${PALETTE.edge}"></span>${escapeHtml(names.edges.split(" over ")[0])}</span>`,
  ];
  if (hasMask) {
    keys.push(
      `<span class="key"><span class="swatch" style="background:#0e1216;outline:2px solid ${PALETTE.metal};outline-offset:-4px"></span>metal mask outline</span>`,
    );
  }
  if (hasLandmarks) {
    keys.push(
      `<span class="key"><svg width="16" height="16" aria-hidden="true"><circle cx="8" cy="8" r="5.5" fill="#0e1216" stroke="${PALETTE.fixedLandmark}" stroke-width="1.8"/></svg>fixed landmark (ring)</span>`,
      `<span class="key"><svg width="16" height="16" aria-hidden="true"><rect width="16" height="16" fill="#0e1216"/><path d="M3.5 3.5L12.5 12.5M3.5 12.5L12.5 3.5" stroke="${PALETTE.movingLandmark}" stroke-width="1.8"/></svg>moving landmark mapped to fixed (cross)</span>`,
    );
  }
  keys.push('<span class="key">white edge ticks: the point the planes pass through</span>');
  return `<div class="legend-row">${keys.join("")}</div>`;
}

function panelsSection(input: AlignReportInput, points: readonly PointOfInterest[]): string {
  const f = input.fixed;
  const fixedIsCt = f.modality === "ct";
  const movingIsCt = input.movingInfo.modality === "ct";
  const ctW = input.display?.ctWindow ?? ctWindow("bone-soft");
  const fixedWindow = fixedIsCt ? ctW : percentileWindow(f.volume.data);
  const movingWindow = movingIsCt ? ctW : percentileWindow(input.movingOnFixed.data);
  const landmarks: PanelLandmark[] = (input.landmarks ?? []).map((l) => ({
    label: l.label,
    fixedMm: l.fixedMm,
    ...(l.mappedMovingMm ? { mappedMovingMm: l.mappedMovingMm } : {}),
  }));
  const panelInput: PlanePanelInput = {
    fixed: f.volume,
    movingOnFixed: input.movingOnFixed,
    fixedWindow,
    movingWindow,
    fixedName: modalityName(f.modality) === "image" ? "fixed" : modalityName(f.modality),
    movingName:
      modalityName(input.movingInfo.modality) === "image"
        ? "moving"
        : modalityName(input.movingInfo.modality),
    edgeBase: movingIsCt && !fixedIsCt ? "moving" : "fixed",
    ...(input.metalMask ? { metalMask: input.metalMask } : {}),
    landmarks,
    ...(input.display?.maxPanelPx !== undefined ? { maxPanelPx: input.display.maxPanelPx } : {}),
    ...(input.display?.checkerTileMm !== undefined ? { checkerTileMm: input.display.checkerTileMm } : {}),
    ...(input.display?.edgePercentile !== undefined ? { edgePercentile: input.display.edgePercentile } : {}),
    ...(input.display?.landmarkSlabMm !== undefined ? { landmarkSlabMm: input.display.landmarkSlabMm } : {}),
  };
  if (panelInput.fixedName === panelInput.movingName) {
    panelInput.fixedName = `${panelInput.fixedName} A`;
    panelInput.movingName = `${panelInput.movingName} B`;
  }
  const names = panelNames(panelInput);
  const slab = input.display?.landmarkSlabMm ?? 4;
  const intro =
    `<p>${escapeHtml(DISPLAY_CONVENTION)} Slices follow the fixed image's voxel grid. Windows: ${escapeHtml(panelInput.fixedName)} ${escapeHtml(fixedWindow.label)}; ${escapeHtml(panelInput.movingName)} ${escapeHtml(movingWindow.label)}.` +
    (landmarks.length > 0
      ? ` Landmarks within \u00b1${formatNumber(slab, 1)} mm of a plane are marked on it.`
      : "") +
    "</p>" +
    legendHtml(input.metalMask !== undefined, landmarks.length > 0, names);
  const blocks: string[] = [];
  for (const point of points) {
    const heads = (["fixed", "moving", "checkerboard", "edges"] as const)
      .map((k) => `<div class="col-head">${escapeHtml(names[k])}</div>`)
      .join("");
    const rows: string[] = [];
    for (const plane of PLANES) {
      const pp = renderPlanePanels(panelInput, plane, point.mm);
      const axisName = ["i", "j", "k"][pp.layout.throughAxis];
      const note = pp.pointInside ? "" : " (point outside the image; nearest slice)";
      const worldAxis = plane === "axial" ? "z" : plane === "coronal" ? "y" : "x";
      const n = pp.markedLandmarks.length;
      const marks =
        n > 0
          ? `<span title="${escapeHtml(pp.markedLandmarks.join(", "))}">${n} landmark${n > 1 ? "s" : ""}</span>`
          : "";
      rows.push(
        `<div class="row-head">${plane}<span>${axisName} = ${pp.sliceIndex}</span><span>${worldAxis} = ${escapeHtml(formatNumber(pp.planeWorldMm, 1))}\u00a0mm${escapeHtml(note)}</span>${marks}</div>` +
          pp.panels.map((p) => p.html).join(""),
      );
    }
    blocks.push(
      `<div class="points" data-point="${point.key}"><h3>${escapeHtml(point.title)} ${escapeHtml(fmtVec(point.mm, 1))} mm</h3><p class="muted">${escapeHtml(point.how)}.</p>` +
        `<div class="panel-grid"><div></div>${heads}${rows.join("")}</div></div>`,
    );
  }
  return section("images", "Images", intro + blocks.join(""));
}

function traceSection(input: AlignReportInput): string {
  const levels = input.metricTrace;
  const metric = input.metric;
  const lower = metric.lowerIsBetter ?? true;
  const summary = renderKeyValueTable([
    ["metric", metric.name],
    ["value at start", metric.start === undefined ? undefined : formatNumber(metric.start, 5)],
    ["final value", metric.final === undefined ? undefined : formatNumber(metric.final, 5)],
    ["levels (sampling step)", levels.map((l) => `${formatNumber(l.stepMm, 2)} mm`).join(", ") || undefined],
    ["evaluations per level", levels.map((l) => String(l.values.length)).join(", ") || undefined],
  ]);
  const plot =
    levels.length > 0
      ? `<div class="plot">${metricTracePlot(levels, metric.name, lower)}</div>`
      : '<p class="muted">No optimiser trace was recorded.</p>';
  return section("trace", "Optimiser trace", plot + summary);
}

function landmarkSection(input: AlignReportInput): string {
  const lms = input.landmarks ?? [];
  if (lms.length === 0) return "";
  const errors = lms.map((l) => l.errorMm).filter((e) => Number.isFinite(e));
  const mean = errors.length > 0 ? errors.reduce((a, b) => a + b, 0) / errors.length : Number.NaN;
  const max = errors.length > 0 ? Math.max(...errors) : Number.NaN;
  const flag = input.landmarkFlagMm;
  const flagged = new Set<number>();
  const rows = lms.map((l, r) => {
    if (flag !== undefined && l.errorMm > flag) flagged.add(r);
    return [
      l.label,
      html(formatNumber(l.errorMm, 2) + (flag !== undefined && l.errorMm > flag ? " \u26a0" : "")),
      l.predictedTreMm === undefined ? undefined : formatNumber(l.predictedTreMm, 2),
      fmtVec(l.fixedMm, 1),
      fmtVec(l.mappedMovingMm, 1),
    ];
  });
  const table = renderTable(
    [
      { label: "label" },
      { label: "error (mm)", numeric: true },
      { label: "predicted TRE (mm)", numeric: true },
      { label: "fixed landmark (mm)", numeric: true },
      { label: "moving landmark mapped to fixed (mm)", numeric: true },
    ],
    rows,
    { flaggedRows: flagged },
  );
  const summary = renderKeyValueTable([
    ["landmarks", lms.length],
    ["mean error (mm)", formatNumber(mean, 2)],
    ["max error (mm)", formatNumber(max, 2)],
    ["FRE (mm)", input.freMm === undefined ? undefined : formatNumber(input.freMm, 2)],
  ]);
  const note =
    flag !== undefined
      ? `<p class="muted">Rows marked \u26a0 have an error above ${formatNumber(flag, 1)} mm.</p>`
      : "";
  return section(
    "landmarks",
    "Landmarks",
    `<p>Error = distance between the transformed fixed landmark and its moving partner, in mm. Predicted TRE is the error expected at that point from the landmark configuration.</p>${summary}${table}${note}`,
  );
}

function diceSection(input: AlignReportInput): string {
  const dice = input.dice ?? [];
  if (dice.length === 0) return "";
  const rows = dice.map((d) => [
    d.label,
    d.name ?? "",
    formatNumber(d.dice, 3),
    d.fixedVoxels === undefined ? undefined : d.fixedVoxels,
    d.movingVoxels === undefined ? undefined : d.movingVoxels,
  ]);
  return section(
    "dice",
    "Label overlap (Dice)",
    "<p>Moving labels propagated onto the fixed grid (nearest neighbour) and compared with the fixed labels: Dice = 2|A\u2229B| / (|A| + |B|).</p>" +
      renderTable(
        [
          { label: "label", numeric: true },
          { label: "name" },
          { label: "Dice", numeric: true },
          { label: "fixed voxels", numeric: true },
          { label: "propagated voxels", numeric: true },
        ],
        rows,
      ),
  );
}

function qualitySection(input: AlignReportInput): string {
  const pairs: [string, string | number | undefined][] = [
    [
      "inverse consistency (mm)",
      input.inverseConsistencyMm === undefined ? undefined : formatNumber(input.inverseConsistencyMm, 4),
    ],
    [
      "overlap of the fields of view",
      input.overlapFraction === undefined ? undefined : `${formatNumber(100 * input.overlapFraction, 1)} %`,
    ],
  ];
  if (input.metalHu !== undefined) pairs.push(["metal threshold (HU)", input.metalHu]);
  if (input.metalMask) {
    let count = input.metalVoxels;
    if (count === undefined) {
      count = 0;
      for (let p = 0; p < input.metalMask.length; p++) if (input.metalMask[p] !== 0) count++;
    }
    pairs.push(["metal-mask voxels (fixed grid)", count]);
  }
  for (const [k, v] of input.summaryExtra ?? []) pairs.push([k, v]);
  return section(
    "quality",
    "Consistency and overlap",
    "<p>Inverse consistency: the largest distance, over the implant region (the metal's box grown by 30 mm), between this transform and the one found when the finest level is registered again sampling the other image. Overlap: share of the samples (inside the sampled image's body, within the other image's field of view) whose mapped position lands inside the other image's body.</p>" +
      renderKeyValueTable(pairs),
  );
}

function timingSection(input: AlignReportInput): string {
  const entries = Object.entries(input.timings).filter(([k]) => k !== "total");
  const total = input.timings.total;
  const sum = entries.reduce((a, [, v]) => a + (Number.isFinite(v) ? v : 0), 0);
  const rows = entries.map(([k, v]) => [k, formatNumber(v, 2)]);
  rows.push([total !== undefined ? "total" : "sum of stages", formatNumber(total ?? sum, 2)]);
  return section(
    "timings",
    "Timings",
    renderTable([{ label: "stage" }, { label: "seconds", numeric: true }], rows, {
      flaggedRows: new Set<number>(),
    }),
  );
}

function softwareSection(input: AlignReportInput): string {
  const sw = input.software ?? softwareInfo();
  return section(
    "software",
    "Software",
    renderKeyValueTable([
      ["software", `${sw.name} ${sw.version}`],
      ["page", "self-contained: images embedded as PNG data, plots as SVG; no network, no script"],
    ]),
  );
}

function keyNumbers(input: AlignReportInput): string {
  const parts: string[] = [];
  const lms = input.landmarks ?? [];
  if (lms.length > 0) {
    const e = lms.map((l) => l.errorMm).filter((v) => Number.isFinite(v));
    if (e.length > 0) {
      parts.push(`mean landmark error ${formatNumber(e.reduce((a, b) => a + b, 0) / e.length, 2)} mm`);
      parts.push(`max ${formatNumber(Math.max(...e), 2)} mm (${e.length} landmarks)`);
    }
  }
  if (input.dice && input.dice.length > 0) {
    parts.push(`lowest Dice ${formatNumber(Math.min(...input.dice.map((d) => d.dice)), 3)}`);
  }
  if (input.overlapFraction !== undefined)
    parts.push(`overlap ${formatNumber(100 * input.overlapFraction, 1)} %`);
  parts.push(`model ${input.transform.model}, metric ${input.metric.name}`);
  return `<p class="keys"><strong>At a glance:</strong> ${escapeHtml(parts.join(" \u00b7 "))}</p>`;
}

/**
 * Render the align report as one complete, self-contained HTML document.
 * @param input - results of the alignment and the images on the fixed grid
 * @returns HTML text (UTF-8)
 * @throws CoxaError BAD_ARGUMENT when the verdict or transform is malformed, or the resampled
 *   moving image or the metal mask is not on the fixed grid
 */
export function renderAlignReport(input: AlignReportInput): string {
  validate(input);
  const points = choosePoints(input.fixed.volume, {
    ...(input.pointsMm?.implant ? { implant: input.pointsMm.implant } : {}),
    ...(input.pointsMm?.otherHip ? { otherHip: input.pointsMm.otherHip } : {}),
    ...(input.metalMask ? { metalMask: input.metalMask } : {}),
    fixedIsCt: input.fixed.modality === "ct",
  });
  const sw = input.software ?? softwareInfo();
  const title = input.title ?? "coxa alignment report";
  const toc: [string, string][] = [
    ["inputs", "Inputs"],
    ["transform", "Transform"],
    ["images", "Images"],
    ["trace", "Optimiser trace"],
  ];
  if ((input.landmarks ?? []).length > 0) toc.push(["landmarks", "Landmarks"]);
  if ((input.dice ?? []).length > 0) toc.push(["dice", "Dice"]);
  toc.push(["quality", "Consistency"], ["timings", "Timings"], ["software", "Software"]);
  const body = [
    inputsSection(input),
    transformSection(input),
    panelsSection(input, points),
    traceSection(input),
    landmarkSection(input),
    diceSection(input),
    qualitySection(input),
    timingSection(input),
    softwareSection(input),
  ].join("\n");
  return renderPage({
    title,
    subtitle: `${sw.name} ${sw.version}${input.generatedAt ? ` \u00b7 ${input.generatedAt}` : ""}`,
    lead: verdictBanner(input.verdict, input.reasons) + keyNumbers(input) + careNote(),
    toc,
    body,
    footer: `${sw.name} ${sw.version} \u00b7 research software, not a medical device; results must be reviewed by a qualified person.`,
  });
}

/**
 * Render the align report and write it atomically (temporary name, then rename).
 * @param path - destination, e.g. OUT/report.html
 * @param input - as renderAlignReport
 * @returns the number of bytes written
 * @throws CoxaError as renderAlignReport; file system errors as thrown by node:fs
 */
export function writeAlignReport(path: string, input: AlignReportInput): number {
  const text = renderAlignReport(input);
  const bytes = Buffer.from(text, "utf8");
  writeFileAtomic(path, bytes);
  return bytes.length;
}
