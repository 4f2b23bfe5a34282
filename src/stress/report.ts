/**
 * stress.html: one self-contained, offline page (no scripts, inline SVG plots) that shows how
 * registration of the pair held up under implant shadowing. Order: the conclusion and the
 * "use with care" note, success rate and median error against severity (metal mask on vs off),
 * error against the starting offset, the per-severity table, settings, every trial.
 *
 * Conventions: errors are those of stress.json (mm, the trial transform against the reference;
 * see src/stress/error.ts); the starting offset on the scatter plot is the error of the starting
 * pose under the same definition, so both axes are in the same unit.
 */
import {
  careNote,
  escapeHtml,
  formatNumber,
  renderKeyValueTable,
  renderMatrix,
  renderPage,
  renderTable,
  section,
} from "../report/html.js";
import { linePlot, type PlotSeries, scatterPlot } from "../report/svg-plot.js";
import type { StressDocument } from "./stress.js";
import { formatSeverity, MASK_MODES, type MaskMode, SURVIVAL_RATE } from "./summary.js";

const MODE_LABEL: Record<MaskMode, string> = { on: "metal mask on", off: "metal mask off" };

function plot(svg: string): string {
  return `<div class="plot">${svg}</div>`;
}

/**
 * The stress report page.
 * @param doc - stress.json's content
 * @returns a complete HTML document
 */
export function renderStressReport(doc: StressDocument): string {
  const sevs = doc.severity_results;
  const successSeries: PlotSeries[] = MASK_MODES.map((mode) => ({
    name: MODE_LABEL[mode],
    points: sevs.map((r) => [r.severity, 100 * r.modes[mode].success_rate] as const),
    markers: true,
  }));
  const medianSeries: PlotSeries[] = MASK_MODES.map((mode) => ({
    name: MODE_LABEL[mode],
    points: sevs.map((r) => [r.severity, r.modes[mode].median_error_mm ?? Number.NaN] as const),
    markers: true,
  }));
  const scatterSeries: PlotSeries[] = MASK_MODES.map((mode) => ({
    name: MODE_LABEL[mode],
    points: doc.rows.filter((r) => r.mask === mode).map((r) => [r.start_error_mm, r.error_mm] as const),
  }));
  const sevDomain: [number, number] = [0, 1];
  const successMm = doc.settings.success_mm;

  const plots = section(
    "plots",
    "Success and error against severity",
    `<p>Share of trials whose result lies within ${formatNumber(successMm, 2)} mm of the reference, and the median error, at each severity of added implant shadowing. Both modes start every trial from the same pose.</p>` +
      plot(
        linePlot({
          title: "Success rate against severity",
          xLabel: "artifact severity (0 = inputs as given, 1 = full strength)",
          yLabel: "trials within the success threshold (%)",
          series: successSeries,
          xDomain: sevDomain,
          yDomain: [0, 100],
          referenceLines: [
            { axis: "y", value: 100 * SURVIVAL_RATE, label: `${Math.round(100 * SURVIVAL_RATE)}%` },
          ],
        }),
      ) +
      plot(
        linePlot({
          title: "Median error against severity",
          xLabel: "artifact severity (0 = inputs as given, 1 = full strength)",
          yLabel: "median error against the reference (mm)",
          series: medianSeries,
          xDomain: sevDomain,
          yFromZero: true,
          referenceLines: [
            { axis: "y", value: successMm, label: `success ${formatNumber(successMm, 2)} mm` },
          ],
        }),
      ),
  );
  const scatter = section(
    "offset",
    "Error against starting offset",
    "<p>Each point is one trial in one mode, at any severity: how far its start was from the reference (x) and how far its result is (y), with the error definition below.</p>" +
      plot(
        scatterPlot({
          title: "Result error against starting offset",
          xLabel: "starting offset: error of the start against the reference (mm)",
          yLabel: "result error against the reference (mm)",
          series: scatterSeries,
          xDomain: [0, Math.max(1, ...doc.rows.map((r) => r.start_error_mm))],
          yFromZero: true,
          referenceLines: [
            { axis: "y", value: successMm, label: `success ${formatNumber(successMm, 2)} mm` },
          ],
        }),
      ),
  );
  const table = section(
    "severities",
    "Per severity",
    renderTable(
      [
        { label: "severity", numeric: true },
        { label: "CT slices with metal", numeric: true },
        { label: "CT change, max (HU)", numeric: true },
        { label: "MR shift, max (mm)", numeric: true },
        { label: "mask on: success", numeric: true },
        { label: "median (mm)", numeric: true },
        { label: "mask off: success", numeric: true },
        { label: "median (mm)", numeric: true },
      ],
      sevs.map((r) => [
        formatSeverity(r.severity),
        r.ct.slices_with_metal,
        formatNumber(r.ct.max_abs_artifact_hu, 0),
        formatNumber(r.mr.max_displacement_mm, 1),
        `${r.modes.on.successes}/${r.modes.on.trials}`,
        formatNumber(r.modes.on.median_error_mm, 2),
        `${r.modes.off.successes}/${r.modes.off.trials}`,
        formatNumber(r.modes.off.median_error_mm, 2),
      ]),
      { flaggedRows: new Set(sevs.flatMap((r, i) => (r.modes.on.success_rate < SURVIVAL_RATE ? [i] : []))) },
    ),
  );
  const st = doc.settings;
  const settings = section(
    "settings",
    "Inputs and settings",
    renderKeyValueTable([
      ["fixed (CT)", `${doc.fixed.path} (${doc.fixed.shape.join(" \u00d7 ")})`],
      ["moving (MR)", `${doc.moving.path} (${doc.moving.shape.join(" \u00d7 ")})`],
      [
        "reference",
        `${doc.reference.kind === "truth" ? "phantom truth" : "transform"}: ${doc.reference.path}`,
      ],
      [
        "implant centre (mm)",
        `${doc.implant.center_mm.map((v) => formatNumber(v, 1)).join(", ")} (${doc.implant.source === "virtual" ? `virtual implant, ${doc.implant.virtual?.side} side` : `centroid of ${doc.implant.ct_metal_voxels} CT voxels \u2265 ${st.metal_hu} HU`})`,
      ],
      ["error", doc.error.definition],
      ["starting poses", doc.perturbation],
      ["trials per severity", st.trials],
      ["largest offsets", `${formatNumber(st.offset_mm, 1)} mm, ${formatNumber(st.offset_deg, 1)} degrees`],
      ["success threshold", `${formatNumber(successMm, 2)} mm`],
      [
        "registration",
        `${st.model}, ${st.metric}, levels ${st.levels_mm.join(", ")} mm, global search ${st.global_search ? "on" : "off"}, metal \u2265 ${st.metal_hu} HU with ${st.metal_margin_mm} mm margin when the mask is on`,
      ],
      ["seed", st.seed],
      ["reproducibility", doc.determinism],
    ]) +
      "<h3>Reference transform (fixed world to moving world, mm)</h3>" +
      renderMatrix(doc.reference.fixed_to_moving, 6, "reference fixed-to-moving matrix"),
  );
  const trials = section(
    "trials",
    "Every trial",
    renderTable(
      [
        { label: "severity", numeric: true },
        { label: "trial", numeric: true },
        { label: "offset (mm)", numeric: true },
        { label: "offset (deg)", numeric: true },
        { label: "mask" },
        { label: "start error (mm)", numeric: true },
        { label: "error (mm)", numeric: true },
        { label: "success" },
        { label: "verdict" },
        { label: "seconds", numeric: true },
      ],
      doc.rows.map((r) => [
        formatSeverity(r.severity),
        r.trial,
        formatNumber(r.offset_mm, 2),
        formatNumber(r.offset_deg, 2),
        r.mask,
        formatNumber(r.start_error_mm, 2),
        formatNumber(r.error_mm, 3),
        r.success ? "yes" : "no",
        r.verdict,
        formatNumber(r.seconds, 1),
      ]),
      { flaggedRows: new Set(doc.rows.flatMap((r, i) => (r.success ? [] : [i]))) },
    ),
  );
  const lead =
    `<section id="conclusion" class="care"><strong>Conclusion.</strong> ${escapeHtml(doc.conclusion.text)} ` +
    `${escapeHtml(doc.exit_reason)}</section>${careNote()}`;
  return renderPage({
    title: "coxa stress: registration under implant shadowing",
    subtitle: `${doc.software.name} ${doc.software.version}`,
    lead,
    toc: [
      ["plots", "Against severity"],
      ["offset", "Against offset"],
      ["severities", "Per severity"],
      ["settings", "Settings"],
      ["trials", "Every trial"],
    ],
    body: plots + scatter + table + settings + trials,
    footer: `${doc.software.name} ${doc.software.version} \u00b7 research software, not a medical device; results must be reviewed by a qualified person.`,
  });
}
