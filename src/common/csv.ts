/**
 * CSV tables as coxa reads and writes them (manifests, slices.csv, cohort.csv), following
 * RFC 4180 ("Common Format and MIME Type for CSV Files"): comma-separated fields, a field in
 * double quotes may hold commas, quotes (doubled: "") and line breaks; CRLF, LF or lone CR end
 * a record. Reading ignores a UTF-8 byte-order mark and skips blank lines; writing quotes a
 * field only when it must and ends every record with LF.
 */

/** One record of a CSV text. */
export interface CsvRecord {
  /** Field values (quotes removed). */
  fields: string[];
  /** Whether each field was quoted. */
  quoted: boolean[];
  /** 1-based line where the record starts. */
  line: number;
}

/** A problem found while splitting CSV text (the caller turns it into its own error code). */
export class CsvSyntaxError extends Error {
  readonly line: number;

  /**
   * @param line - 1-based line of the problem
   * @param message - plain sentence
   */
  constructor(line: number, message: string) {
    super(message);
    this.name = "CsvSyntaxError";
    this.line = line;
  }
}

/**
 * Split CSV text into records (RFC 4180). Blank lines are skipped.
 * @param text - the whole file
 * @returns records in order
 * @throws CsvSyntaxError for a quoted field that never closes or text after a closing quote
 */
export function parseCsv(text: string): CsvRecord[] {
  const records: CsvRecord[] = [];
  let i = text.charCodeAt(0) === 0xfeff ? 1 : 0;
  let line = 1;
  const n = text.length;
  while (i < n) {
    const record: CsvRecord = { fields: [], quoted: [], line };
    for (;;) {
      let value = "";
      let quoted = false;
      if (text[i] === '"') {
        quoted = true;
        const openLine = line;
        i++;
        for (;;) {
          if (i >= n) throw new CsvSyntaxError(openLine, "quoted field is never closed");
          const ch = text[i];
          if (ch === '"') {
            if (text[i + 1] === '"') {
              value += '"';
              i += 2;
              continue;
            }
            i++;
            break;
          }
          if (ch === "\n") line++;
          value += ch;
          i++;
        }
        while (i < n && (text[i] === " " || text[i] === "\t")) i++;
        if (i < n && text[i] !== "," && text[i] !== "\n" && text[i] !== "\r") {
          throw new CsvSyntaxError(line, "unexpected text after a closing quote");
        }
      } else {
        const start = i;
        while (i < n && text[i] !== "," && text[i] !== "\n" && text[i] !== "\r") i++;
        value = text.slice(start, i);
      }
      record.fields.push(value);
      record.quoted.push(quoted);
      if (i < n && text[i] === ",") {
        i++;
        continue;
      }
      if (i < n && text[i] === "\r") i++;
      if (i < n && text[i] === "\n") i++;
      line++;
      break;
    }
    const blank = record.fields.length === 1 && !record.quoted[0] && record.fields[0].trim() === "";
    if (!blank) records.push(record);
  }
  return records;
}

/**
 * One CSV field: numbers as given, text quoted when it holds a comma, quote or line break, or
 * starts/ends with a space (RFC 4180).
 * @param value - text, number, or null/undefined for an empty field
 */
export function csvField(value: string | number | null | undefined): string {
  if (value === null || value === undefined) return "";
  const text = String(value);
  return /[",\r\n]|^\s|\s$/.test(text) ? `"${text.replace(/"/g, '""')}"` : text;
}

/**
 * A whole CSV document: header and rows, LF line ends, trailing newline.
 * @param header - column names
 * @param rows - one array of values per row (same length as the header)
 */
export function formatCsv(
  header: readonly string[],
  rows: readonly (readonly (string | number | null | undefined)[])[],
): string {
  const lines = [header.map(csvField).join(",")];
  for (const row of rows) lines.push(row.map(csvField).join(","));
  return `${lines.join("\n")}\n`;
}
