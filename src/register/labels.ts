/**
 * Label overlap after propagation: the moving label map is carried onto the fixed grid through
 * the fixed->moving transform by nearest neighbour (labels never blend), and compared with the
 * fixed label map label by label with the Dice coefficient, 2|A ∩ B| / (|A| + |B|)
 * (Dice 1945). Label names come from a `labels.json` ({"value": "name"}) beside the label file
 * when there is one.
 */
import { existsSync, readFileSync } from "node:fs";
import { dirname, join } from "node:path";
import { CoxaError } from "../common/errors.js";
import { identity, type Mat4 } from "../geometry/mat4.js";
import type { Volume } from "../image/volume.js";
import { resampleOntoSync } from "../resample/resample.js";

/** Dice of one label. */
export interface LabelDice {
  label: number;
  name: string | undefined;
  dice: number;
  fixedVoxels: number;
  movingVoxels: number;
}

/**
 * Names of label values from `labels.json` next to `labelPath`, when present and valid.
 * @returns value -> name, empty when there is no such file
 */
export function readLabelNames(labelPath: string): Map<number, string> {
  const names = new Map<number, string>();
  const file = join(dirname(labelPath), "labels.json");
  if (!existsSync(file)) return names;
  try {
    const json = JSON.parse(readFileSync(file, "utf8")) as Record<string, unknown>;
    for (const [k, v] of Object.entries(json)) {
      const value = Number(k);
      if (Number.isInteger(value) && typeof v === "string") names.set(value, v);
    }
  } catch {
    return new Map();
  }
  return names;
}

/**
 * Propagate moving labels onto the fixed grid and compute Dice per label present in either map
 * (background 0 excluded).
 * @param fixedLabels - fixed label map (its own grid, fixed world)
 * @param movingLabels - moving label map (moving world)
 * @param fixedGrid - the grid to compare on (the fixed image)
 * @param fixedToMoving - transform, fixed world -> moving world
 * @param names - optional value -> name
 * @returns per-label Dice and the propagated moving labels on the fixed grid
 */
export function propagateAndDice(
  fixedLabels: Volume,
  movingLabels: Volume,
  fixedGrid: Volume,
  fixedToMoving: Mat4,
  names: Map<number, string> = new Map(),
): { dice: LabelDice[]; propagated: Volume } {
  const sameGrid =
    fixedLabels.dims.every((d, a) => d === fixedGrid.dims[a]) &&
    fixedLabels.indexToWorld.every((v, i) => Math.abs(v - fixedGrid.indexToWorld[i]) < 1e-6);
  const fixedOn = sameGrid
    ? fixedLabels
    : resampleOntoSync(fixedLabels, fixedGrid, identity(), { interp: "nearest", fill: 0, threads: 1 }).volume;
  const propagated = resampleOntoSync(movingLabels, fixedGrid, fixedToMoving, {
    interp: "nearest",
    fill: 0,
    threads: 1,
  }).volume;
  const a = fixedOn.data;
  const b = propagated.data;
  let maxLabel = 0;
  for (let i = 0; i < a.length; i++) {
    if (a[i] > maxLabel) maxLabel = a[i];
    if (b[i] > maxLabel) maxLabel = b[i];
  }
  if (maxLabel > 65535)
    throw new CoxaError("BAD_INPUT", `label value ${maxLabel} is too large for a label map`);
  const na = new Float64Array(maxLabel + 1);
  const nb = new Float64Array(maxLabel + 1);
  const both = new Float64Array(maxLabel + 1);
  for (let i = 0; i < a.length; i++) {
    const x = a[i];
    const y = b[i];
    if (x > 0 && Number.isInteger(x)) na[x]++;
    if (y > 0 && Number.isInteger(y)) nb[y]++;
    if (x === y && x > 0) both[x]++;
  }
  const dice: LabelDice[] = [];
  for (let v = 1; v <= maxLabel; v++) {
    if (na[v] + nb[v] === 0) continue;
    dice.push({
      label: v,
      name: names.get(v),
      dice: (2 * both[v]) / (na[v] + nb[v]),
      fixedVoxels: na[v],
      movingVoxels: nb[v],
    });
  }
  return { dice, propagated };
}
