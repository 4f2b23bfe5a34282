/**
 * The registration options that `coxa align` and `coxa stress` share (model, metric, pyramid
 * levels, metal threshold and margin), declared once with their defaults and validating parsers.
 */
import { type Command, Option } from "commander";
import { TRANSFORM_MODELS, type TransformModel } from "../geometry/transform-model.js";
import { METRIC_KINDS, type MetricKind } from "../metrics/metric.js";
import { REGISTER_DEFAULTS } from "../register/driver.js";
import { numberIn, numberList } from "./parse.js";

/** Parsed values of the shared options. */
export interface RegistrationFlags {
  model: TransformModel;
  metric: MetricKind;
  levels: number[];
  metalHu: number;
  metalMarginMm: number;
}

/** Add --model, --metric, --levels, --metal-hu and --metal-margin-mm to `cmd`. */
export function addRegistrationOptions(cmd: Command): Command {
  return cmd
    .addOption(
      new Option("--model <model>", "transform model")
        .choices(TRANSFORM_MODELS)
        .default(REGISTER_DEFAULTS.model),
    )
    .addOption(
      new Option("--metric <metric>", "similarity metric")
        .choices(METRIC_KINDS)
        .default(REGISTER_DEFAULTS.metric),
    )
    .addOption(
      new Option("--levels <mm,...>", "pyramid sampling steps in mm, coarse to fine")
        .argParser(numberList(0.1, 100))
        .default([...REGISTER_DEFAULTS.levelsMm], REGISTER_DEFAULTS.levelsMm.join(",")),
    )
    .addOption(
      new Option("--metal-hu <hu>", "CT metal threshold (HU)")
        .argParser(numberIn(-1024, 1e6))
        .default(REGISTER_DEFAULTS.metalHu),
    )
    .addOption(
      new Option("--metal-margin-mm <mm>", "margin excluded around metal (mm)")
        .argParser(numberIn(0, 100))
        .default(REGISTER_DEFAULTS.metalMarginMm),
    );
}
