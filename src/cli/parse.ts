/**
 * Validating option parsers for commander. Each takes the raw string and returns a typed value
 * or throws commander's InvalidArgumentError (exit 2, message names the value), never a bare
 * parseFloat that would take "12abc".
 */
import { InvalidArgumentError } from "commander";

const NUMBER = /^[+-]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d+)?$/;
const INTEGER = /^[+-]?\d+$/;

/** A finite number, optionally within [min, max]. */
export function numberIn(min = -Infinity, max = Infinity): (raw: string) => number {
  return (raw) => {
    const s = raw.trim();
    if (!NUMBER.test(s)) throw new InvalidArgumentError(`"${raw}" is not a number.`);
    const v = Number(s);
    if (v < min || v > max) throw new InvalidArgumentError(`${v} is outside ${min}..${max}.`);
    return v;
  };
}

/** An integer, optionally within [min, max]. */
export function integerIn(
  min = Number.MIN_SAFE_INTEGER,
  max = Number.MAX_SAFE_INTEGER,
): (raw: string) => number {
  return (raw) => {
    const s = raw.trim();
    if (!INTEGER.test(s)) throw new InvalidArgumentError(`"${raw}" is not a whole number.`);
    const v = Number(s);
    if (v < min || v > max) throw new InvalidArgumentError(`${v} is outside ${min}..${max}.`);
    return v;
  };
}

/** A comma-separated list of numbers, each within [min, max]; at least `minCount` entries. */
export function numberList(min = -Infinity, max = Infinity, minCount = 1): (raw: string) => number[] {
  const one = numberIn(min, max);
  return (raw) => {
    const parts = raw.split(",").map((p) => p.trim());
    if (parts.length < minCount || parts.some((p) => p === "")) {
      throw new InvalidArgumentError(
        `"${raw}" is not a comma-separated list of ${minCount} or more numbers.`,
      );
    }
    return parts.map(one);
  };
}
