import { describe, expect, it } from "vitest";
import {
  careNote,
  formatNumber,
  html,
  renderKeyValueTable,
  renderMatrix,
  renderPage,
  renderTable,
  verdictBanner,
} from "../../src/report/html.js";

describe("page shell", () => {
  it("verdictBanner gives each verdict its own icon and word, so colour is not needed to tell them apart", () => {
    const pass = verdictBanner("pass", ["TRE 0.3 mm"]);
    const review = verdictBanner("review", []);
    const fail = verdictBanner("fail", ["no overlap"], "Case 12");
    expect(pass).toContain('class="verdict pass"');
    expect(pass).toContain(">\u2713</div>");
    expect(pass).toContain("Alignment: PASS");
    expect(pass).toContain("<li>TRE 0.3 mm</li>");
    expect(review).toContain(">!</div>");
    expect(review).toContain("a person should look"); // default reason when none is given
    expect(fail).toContain(">\u2715</div>");
    expect(fail).toContain("Case 12: FAIL");
  });

  it("careNote says research software, not a medical device, qualified review, local regulations", () => {
    const note = careNote();
    for (const s of ["research software", "not a medical device", "qualified person", "local regulations"]) {
      expect(note).toContain(s);
    }
  });

  it("renderTable escapes text, formats numbers, inserts Html verbatim and marks flagged rows", () => {
    const t = renderTable(
      [{ label: "name" }, { label: "value", numeric: true }, { label: "note" }],
      [
        ["<a>", 1.23456, html("<em>ok</em>")],
        ["b", null, "x"],
      ],
      { caption: "T", flaggedRows: new Set([1]) },
    );
    expect(t).toContain('<td>&lt;a&gt;</td><td class="num">1.235</td><td><em>ok</em></td>');
    expect(t).toContain('<tr class="flag"><td>b</td><td class="num">\u2013</td>');
    expect(t).toContain("<caption>T</caption>");
    expect(renderKeyValueTable([["k", 3]])).toContain('<th scope="row">k</th><td>3</td>');
  });

  it("formatNumber uses a real minus sign, no negative zero, and an en dash for missing values", () => {
    expect(formatNumber(-1.5, 2)).toBe("\u22121.50");
    expect(formatNumber(-0.0001, 2)).toBe("0.00");
    expect(formatNumber(Number.NaN)).toBe("\u2013");
    expect(formatNumber(undefined)).toBe("\u2013");
    expect(renderMatrix([[1, -2]], 1)).toContain("<td>1.0</td><td>\u22122.0</td>");
  });

  it("renderPage builds a document with title, lead before the contents, then the body", () => {
    const page = renderPage({
      title: "T & U",
      lead: "<p>LEAD</p>",
      toc: [["a", "A"]],
      body: "<p>BODY</p>",
      footer: "F",
    });
    expect(page).toContain("<title>T &amp; U</title>");
    const lead = page.indexOf("LEAD");
    const toc = page.indexOf('<nav class="toc"');
    const body = page.indexOf("BODY");
    expect(lead).toBeGreaterThan(0);
    expect(toc).toBeGreaterThan(lead);
    expect(body).toBeGreaterThan(toc);
    expect(page).toContain("<footer>F</footer>");
    expect(page).toContain("@media print");
  });
});
