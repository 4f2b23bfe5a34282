/**
 * The page shell shared by coxa's HTML reports (align, cohort, stress): document frame with
 * inline CSS, verdict banner, "use with care" note, tables and sections.
 *
 * Pages are self-contained and offline: no scripts, no external style sheets, fonts or images
 * (images are data URIs, plots inline SVG). Colour is never the only carrier of meaning: the
 * verdict has an icon and a word, series have dash patterns and marker shapes. A print style
 * sheet drops the backgrounds and keeps figures whole.
 *
 * Strings passed as plain text are escaped here; values typed `Html` are inserted as they are
 * and must come from these helpers or the plot/panel builders.
 */
import { escapeXml } from "./svg-plot.js";

/** Quality verdict of a result. */
export type Verdict = "pass" | "review" | "fail";

/** Markup that is inserted without escaping. */
export interface Html {
  html: string;
}

/** A table cell: plain text or number (escaped/formatted) or ready markup. */
export type Cell = string | number | null | undefined | Html;

/** Wrap trusted markup so table helpers insert it verbatim. */
export function html(markup: string): Html {
  return { html: markup };
}

/** Escape text for HTML content or attribute values. */
export function escapeHtml(text: string): string {
  return escapeXml(text);
}

/**
 * Format a number for a report: fixed decimals, a real minus sign, "–" for missing values.
 * @param value - number (NaN/undefined print as an en dash)
 * @param decimals - digits after the point (default 2)
 */
export function formatNumber(value: number | null | undefined, decimals = 2): string {
  if (value === null || value === undefined || !Number.isFinite(value)) return "\u2013";
  const s = value.toFixed(decimals);
  return /^-0(\.0*)?$/.test(s) ? s.slice(1) : s.replace("-", "\u2212");
}

/** Our palette (also used by the panel overlays so page legend and images agree). */
export const PALETTE = {
  paper: "#f6f4ef",
  ink: "#22303a",
  muted: "#5b6770",
  rule: "#d8d4ca",
  accent: "#1d5f7a",
  pass: "#2e7d4f",
  review: "#8f6400",
  fail: "#a8322d",
  /** Edge overlay of the second image on the first. */
  edge: "#ffb020",
  /** Metal mask outline. */
  metal: "#3fd0e0",
  /** Fixed landmark marker. */
  fixedLandmark: "#7cf29a",
  /** Mapped moving landmark marker. */
  movingLandmark: "#ff6fae",
} as const;

/** The page style sheet (inline in every report). */
export const PAGE_CSS = `
:root { color-scheme: light; }
* { box-sizing: border-box; }
html { background: ${PALETTE.paper}; }
body { margin: 0 auto; max-width: 1360px; padding: 24px 28px 48px; color: ${PALETTE.ink};
  font: 15px/1.5 system-ui, -apple-system, "Segoe UI", Roboto, "Noto Sans", sans-serif; }
header.page-head { display: flex; justify-content: space-between; align-items: baseline; gap: 16px;
  border-bottom: 2px solid ${PALETTE.ink}; padding-bottom: 8px; margin-bottom: 18px; }
header.page-head h1 { font-size: 22px; margin: 0; letter-spacing: 0.01em; }
header.page-head .sub { color: ${PALETTE.muted}; font-size: 13px; text-align: right; }
h2 { font-size: 18px; margin: 34px 0 10px; padding-top: 6px; border-top: 1px solid ${PALETTE.rule}; }
h3 { font-size: 15px; margin: 20px 0 8px; }
p { margin: 6px 0 10px; max-width: 92ch; }
.muted { color: ${PALETTE.muted}; }
code, .mono, td.num, .hash { font-family: ui-monospace, "SFMono-Regular", Menlo, Consolas, "DejaVu Sans Mono", monospace; font-size: 13px; }
.hash { word-break: break-all; }
.verdict { display: grid; grid-template-columns: auto 1fr; gap: 6px 18px; align-items: center;
  border: 2px solid; border-left-width: 12px; border-radius: 6px; padding: 14px 20px; margin: 0 0 14px; background: #fff; }
.verdict .icon { grid-row: span 2; width: 64px; height: 64px; border-radius: 50%; color: #fff;
  font-size: 38px; line-height: 64px; text-align: center; font-weight: 700; }
.verdict .word { font-size: 30px; font-weight: 800; letter-spacing: 0.08em; }
.verdict ul { margin: 0; padding-left: 20px; font-size: 16px; }
.verdict.pass { border-color: ${PALETTE.pass}; background: #eaf4ec; } .verdict.pass .icon { background: ${PALETTE.pass}; } .verdict.pass .word { color: ${PALETTE.pass}; }
.verdict.review { border-color: ${PALETTE.review}; background: #fbf2dd; } .verdict.review .icon { background: ${PALETTE.review}; border-radius: 6px; } .verdict.review .word { color: ${PALETTE.review}; }
.verdict.fail { border-color: ${PALETTE.fail}; background: #f8e6e4; } .verdict.fail .icon { background: ${PALETTE.fail}; border-radius: 0; } .verdict.fail .word { color: ${PALETTE.fail}; }
.care { border: 1px solid ${PALETTE.rule}; border-left: 6px solid ${PALETTE.ink}; background: #fff; padding: 10px 16px; margin: 0 0 16px; }
.care strong { letter-spacing: 0.02em; }
nav.toc { font-size: 13px; margin: 4px 0 8px; } nav.toc a { color: ${PALETTE.accent}; margin-right: 14px; text-decoration: none; border-bottom: 1px dotted; }
table.data { border-collapse: collapse; margin: 6px 0 14px; background: #fff; font-size: 14px; }
table.data caption { text-align: left; font-weight: 600; padding: 4px 0; caption-side: top; }
table.data th, table.data td { border: 1px solid ${PALETTE.rule}; padding: 4px 10px; vertical-align: top; }
table.data th { background: #ecebe5; text-align: left; font-weight: 600; }
table.data td.num, table.data th.num { text-align: right; white-space: nowrap; }
table.data tr.flag td { background: #fbf2dd; }
table.kv th { min-width: 12em; }
table.inputs { width: 100%; table-layout: fixed; } table.inputs th:first-child { width: 11em; }
table.matrix td { font-family: ui-monospace, Menlo, Consolas, "DejaVu Sans Mono", monospace; text-align: right; padding: 2px 10px; border: none; }
table.matrix { border-left: 2px solid ${PALETTE.ink}; border-right: 2px solid ${PALETTE.ink}; border-collapse: separate; background: #fff; margin: 6px 0 12px; }
.panel-grid { display: grid; grid-template-columns: 76px repeat(4, minmax(0, max-content)); gap: 8px 8px; align-items: start; margin: 8px 0 18px; }
.panel-grid .col-head { font-weight: 600; font-size: 13px; text-align: center; align-self: end; }
.panel-grid .row-head { font-size: 13px; font-weight: 600; padding-top: 6px; }
.panel-grid .row-head span { display: block; font-weight: 400; color: ${PALETTE.muted}; font-size: 12px; }
figure.panel { margin: 0; background: #0e1216; border: 1px solid #0e1216; line-height: 0; }
figure.panel svg { display: block; max-width: 100%; height: auto; }
.legend-row { display: flex; flex-wrap: wrap; gap: 6px 20px; font-size: 13px; margin: 6px 0; }
.legend-row .key { display: inline-flex; align-items: center; gap: 6px; }
.swatch { display: inline-block; width: 22px; height: 12px; border: 1px solid ${PALETTE.ink}; }
.plot { background: #fff; border: 1px solid ${PALETTE.rule}; display: inline-block; margin: 6px 0 12px; max-width: 100%; }
.plot svg { display: block; max-width: 100%; height: auto; }
footer { margin-top: 36px; font-size: 12px; color: ${PALETTE.muted}; border-top: 1px solid ${PALETTE.rule}; padding-top: 8px; }
@media print {
  html, body { background: #fff; }
  body { max-width: none; padding: 0; font-size: 11pt; }
  nav.toc { display: none; }
  .verdict { background: #fff !important; }
  .verdict .icon { border: 2px solid currentColor; }
  figure, .plot, table, .verdict, .care { break-inside: avoid; }
  .points { break-before: page; }
  h2 { break-after: avoid; }
}
`;

const VERDICT_TEXT: Record<Verdict, { icon: string; word: string; meaning: string }> = {
  pass: { icon: "\u2713", word: "PASS", meaning: "all quality checks were met" },
  review: { icon: "!", word: "REVIEW", meaning: "a person should look before the result is used" },
  fail: { icon: "\u2715", word: "FAIL", meaning: "the result did not meet its quality checks" },
};

/**
 * The verdict banner: icon, word and the reasons as a list. Readable without colour (icon and
 * word differ per verdict).
 * @param verdict - pass, review or fail
 * @param reasons - plain sentences, escaped here
 * @param subject - what was judged, e.g. "Alignment" (default)
 */
export function verdictBanner(verdict: Verdict, reasons: readonly string[], subject = "Alignment"): string {
  const t = VERDICT_TEXT[verdict] ?? VERDICT_TEXT.review;
  const items = reasons.length > 0 ? reasons : [t.meaning];
  return (
    `<section class="verdict ${verdict}" id="verdict" aria-label="${escapeHtml(`${subject} verdict: ${t.word}`)}">` +
    `<div class="icon" aria-hidden="true">${t.icon}</div>` +
    `<div class="word">${escapeHtml(subject)}: ${t.word}</div>` +
    `<ul>${items.map((r) => `<li>${escapeHtml(r)}</li>`).join("")}</ul></section>`
  );
}

/** The "use with care" note that every report carries. */
export function careNote(): string {
  return (
    '<aside class="care" id="care"><strong>Use with care.</strong> coxa is research software, not a medical device. ' +
    "Every alignment, measurement and verdict on this page must be reviewed by a qualified person before it informs any decision. " +
    "Clinical use follows local regulations and licensed practice.</aside>"
  );
}

function cellHtml(cell: Cell): string {
  if (cell === null || cell === undefined) return "\u2013";
  if (typeof cell === "number") return formatNumber(cell, Number.isInteger(cell) ? 0 : 3);
  if (typeof cell === "string") return escapeHtml(cell);
  return cell.html;
}

/** A column of renderTable. */
export interface TableColumn {
  label: string;
  /** Right-aligned monospace cells (numbers). */
  numeric?: boolean;
}

/**
 * A data table.
 * @param columns - headers
 * @param rows - cells per row (text is escaped, numbers formatted, `Html` inserted)
 * @param options - caption, CSS class, and rows to highlight (indices)
 */
export function renderTable(
  columns: readonly TableColumn[],
  rows: readonly (readonly Cell[])[],
  options: { caption?: string; className?: string; flaggedRows?: ReadonlySet<number> } = {},
): string {
  const head = columns
    .map((c) => `<th scope="col"${c.numeric ? ' class="num"' : ""}>${escapeHtml(c.label)}</th>`)
    .join("");
  const body = rows
    .map((row, r) => {
      const cells = row
        .map((cell, c) => `<td${columns[c]?.numeric ? ' class="num"' : ""}>${cellHtml(cell)}</td>`)
        .join("");
      return `<tr${options.flaggedRows?.has(r) ? ' class="flag"' : ""}>${cells}</tr>`;
    })
    .join("");
  const caption = options.caption ? `<caption>${escapeHtml(options.caption)}</caption>` : "";
  return `<table class="data${options.className ? ` ${options.className}` : ""}">${caption}<thead><tr>${head}</tr></thead><tbody>${body}</tbody></table>`;
}

/**
 * A two-column table of labelled values.
 * @param pairs - [label, value] rows
 * @param caption - optional caption
 */
export function renderKeyValueTable(pairs: readonly (readonly [string, Cell])[], caption?: string): string {
  const body = pairs
    .map(([k, v]) => `<tr><th scope="row">${escapeHtml(k)}</th><td>${cellHtml(v)}</td></tr>`)
    .join("");
  const cap = caption ? `<caption>${escapeHtml(caption)}</caption>` : "";
  return `<table class="data kv">${cap}<tbody>${body}</tbody></table>`;
}

/**
 * A 4x4 (or any) matrix as a bracketed table of fixed-decimal numbers.
 * @param rows - matrix rows
 * @param decimals - digits after the point (default 6)
 * @param label - accessible name
 */
export function renderMatrix(rows: readonly (readonly number[])[], decimals = 6, label = "matrix"): string {
  const body = rows
    .map((r) => `<tr>${r.map((v) => `<td>${formatNumber(v, decimals)}</td>`).join("")}</tr>`)
    .join("");
  return `<table class="matrix" aria-label="${escapeHtml(label)}"><tbody>${body}</tbody></table>`;
}

/**
 * A page section with a heading.
 * @param id - anchor id (letters, digits, dashes)
 * @param title - heading text
 * @param body - section markup
 */
export function section(id: string, title: string, body: string): string {
  return `<section id="${escapeHtml(id)}"><h2>${escapeHtml(title)}</h2>${body}</section>`;
}

/** Options of renderPage. */
export interface PageOptions {
  /** Document and header title. */
  title: string;
  /** Small text at the right of the header (e.g. software and time). */
  subtitle?: string;
  /** Markup shown first, before the table of contents (verdict banner, care note). */
  lead?: string;
  /** Page body markup (after the lead and the table of contents). */
  body: string;
  /** Table of contents: [anchor id, label]. */
  toc?: readonly (readonly [string, string])[];
  /** Footer text. */
  footer?: string;
}

/**
 * A complete self-contained HTML document with the shared style sheet.
 * @param options - title, body and optional table of contents and footer
 */
export function renderPage(options: PageOptions): string {
  const toc =
    options.toc && options.toc.length > 0
      ? `<nav class="toc" aria-label="Contents">${options.toc.map(([id, label]) => `<a href="#${escapeHtml(id)}">${escapeHtml(label)}</a>`).join("")}</nav>`
      : "";
  return [
    "<!DOCTYPE html>",
    '<html lang="en">',
    "<head>",
    '<meta charset="utf-8">',
    '<meta name="viewport" content="width=device-width, initial-scale=1">',
    // No network: forbid every fetch except inline styles and data-URI images.
    "<meta http-equiv=\"Content-Security-Policy\" content=\"default-src 'none'; img-src data:; style-src 'unsafe-inline'\">",
    `<title>${escapeHtml(options.title)}</title>`,
    `<style>${PAGE_CSS}</style>`,
    "</head>",
    "<body>",
    `<header class="page-head"><h1>${escapeHtml(options.title)}</h1>${options.subtitle ? `<div class="sub">${escapeHtml(options.subtitle)}</div>` : ""}</header>`,
    options.lead ?? "",
    toc,
    options.body,
    options.footer ? `<footer>${escapeHtml(options.footer)}</footer>` : "",
    "</body>",
    "</html>",
    "",
  ].join("\n");
}
