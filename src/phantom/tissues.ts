/**
 * Tissue classes of the synthetic hip and their intensities.
 *
 * CT values are Hounsfield units. By the definition of the scale, air is -1000 HU and water 0 HU;
 * the other values are typical figures quoted from memory (no source): fat about -100, muscle
 * about +50, fluid 0-20, trabecular bone 200-400, cortical bone 1200-1800. Metal is stored at the
 * top of the 12-bit scanner range, 3071 HU (its true attenuation is far higher; the projection
 * physics uses `METALS[..].muPerMm`).
 *
 * MR values describe a T1-weighted-like spin-echo contrast on an arbitrary 0..1000 scale (from
 * memory, no source): fat and fatty marrow bright, muscle intermediate, fluid and flowing blood
 * dark, cortical bone, air, polyethylene and metal black. The MR value is deliberately NOT a
 * monotonic function of the CT value (fat -100 HU bright, fluid 10 HU dark, muscle 50 HU
 * intermediate, trabecular bone 300 HU bright, cortex 1500 HU black).
 *
 * Texture: each tissue carries a smooth random texture (value noise, see texture.ts) of the given
 * amplitude and feature size, evaluated in the patient frame so CT and MR share the pattern.
 */

/** One tissue: CT and MR intensity and texture. */
export interface TissueClass {
  name: string;
  /** CT value in HU. */
  hu: number;
  /** CT texture amplitude in HU (peak). */
  huTexture: number;
  /** MR value on the 0..1000 scale. */
  mr: number;
  /** MR texture amplitude as a fraction of `mr`. */
  mrTexture: number;
  /** Texture feature size in mm. */
  textureMm: number;
}

/** The tissue table: CT HU, MR value and texture of each tissue (see the module header). */
export const TISSUES = {
  air: { name: "air", hu: -1000, huTexture: 0, mr: 0, mrTexture: 0, textureMm: 10 },
  gas: { name: "gas", hu: -990, huTexture: 5, mr: 0, mrTexture: 0, textureMm: 10 },
  skin: { name: "skin", hu: 45, huTexture: 8, mr: 480, mrTexture: 0.05, textureMm: 6 },
  fat: { name: "fat", hu: -100, huTexture: 10, mr: 940, mrTexture: 0.04, textureMm: 12 },
  soft_tissue: { name: "soft_tissue", hu: -25, huTexture: 14, mr: 640, mrTexture: 0.08, textureMm: 7 },
  bowel: { name: "bowel", hu: 25, huTexture: 25, mr: 260, mrTexture: 0.2, textureMm: 6 },
  muscle: { name: "muscle", hu: 52, huTexture: 6, mr: 330, mrTexture: 0.05, textureMm: 8 },
  muscle_fatty: { name: "muscle_fatty", hu: 15, huTexture: 6, mr: 470, mrTexture: 0.05, textureMm: 8 },
  fluid: { name: "fluid", hu: 8, huTexture: 2, mr: 130, mrTexture: 0.02, textureMm: 20 },
  blood: { name: "blood", hu: 40, huTexture: 2, mr: 70, mrTexture: 0.1, textureMm: 10 },
  cartilage: { name: "cartilage", hu: 95, huTexture: 5, mr: 300, mrTexture: 0.04, textureMm: 5 },
  cortical: { name: "cortical", hu: 1450, huTexture: 220, mr: 22, mrTexture: 0.2, textureMm: 5 },
  trabecular: { name: "trabecular", hu: 290, huTexture: 90, mr: 580, mrTexture: 0.12, textureMm: 3 },
  marrow: { name: "marrow", hu: -45, huTexture: 20, mr: 860, mrTexture: 0.06, textureMm: 8 },
  disc: { name: "disc", hu: 80, huTexture: 8, mr: 300, mrTexture: 0.05, textureMm: 6 },
  polyethylene: { name: "polyethylene", hu: -90, huTexture: 0, mr: 0, mrTexture: 0, textureMm: 10 },
  titanium: { name: "titanium", hu: 3071, huTexture: 0, mr: 0, mrTexture: 0, textureMm: 10 },
  cocr: { name: "cocr", hu: 3071, huTexture: 0, mr: 0, mrTexture: 0, textureMm: 10 },
} as const satisfies Record<string, TissueClass>;

/** Name of a tissue in TISSUES. */
export type TissueName = keyof typeof TISSUES;

/** Tissue names in table order (tissue index = position). */
export const TISSUE_NAMES = Object.keys(TISSUES) as TissueName[];

/** Index of a tissue in TISSUE_NAMES (how compiled structures refer to tissues). */
export function tissueIndex(name: TissueName): number {
  return TISSUE_NAMES.indexOf(name);
}

/**
 * Implant metals. Effective linear attenuation near 70 keV and volume susceptibility difference
 * to water are rough values from memory (no source): titanium alloy about 0.2 /mm and 180 ppm,
 * cobalt-chrome about 0.7 /mm and 900 ppm. Codes are the values in metal masks (0 = no metal).
 */
export const METALS = {
  titanium: { code: 1, muPerMm: 0.2, deltaChiPpm: 180 },
  cocr: { code: 2, muPerMm: 0.7, deltaChiPpm: 900 },
} as const;

/** Linear attenuation of water near 70 keV, 1/mm (about 0.019; from memory). */
export const MU_WATER_PER_MM = 0.019;

/**
 * Linear attenuation (1/mm) of a CT value: the Hounsfield definition HU = 1000 (mu - mu_water) / mu_water
 * solved for mu, so air (-1000 HU) has mu = 0 and water (0 HU) has mu_water; negative results clamp to 0.
 */
export function huToMu(hu: number, muWaterPerMm = MU_WATER_PER_MM): number {
  const mu = muWaterPerMm * (1 + hu / 1000);
  return mu > 0 ? mu : 0;
}

/** Lowest stored CT value, HU (the 12-bit scanner range is -1024..3071). */
export const CT_MIN_HU = -1024;
/** Highest stored CT value, HU. */
export const CT_MAX_HU = 3071;
