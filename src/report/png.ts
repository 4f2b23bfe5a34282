/**
 * PNG encoding of 8-bit raster images for the HTML reports, through pngjs (PNG: ISO/IEC 15948,
 * W3C PNG specification). Grey images are written as PNG colour type 0, RGB as type 2, RGBA as
 * type 6, all at 8 bits per sample, so a report panel costs one byte per pixel when it is grey.
 *
 * Storage: `RasterImage.data` is row-major, top row first, left pixel first, `channels` bytes per
 * pixel interleaved (R, G, B[, A]); pixel (x, y) starts at (y * width + x) * channels. Display
 * coordinates: x grows to the right, y grows downwards.
 */
import { PNG } from "pngjs";
import { CoxaError } from "../common/errors.js";

/** Samples per pixel: 1 grey, 3 RGB, 4 RGBA. */
export type Channels = 1 | 3 | 4;

/** An 8-bit raster image, row-major, top row first. */
export interface RasterImage {
  /** Width in pixels (>= 1). */
  width: number;
  /** Height in pixels (>= 1). */
  height: number;
  /** 1 (grey), 3 (RGB) or 4 (RGBA) bytes per pixel, interleaved. */
  channels: Channels;
  /** width * height * channels bytes. */
  data: Uint8Array;
}

/** PNG colour type per channel count (PNG specification, table 11.1). */
const COLOR_TYPE: Record<Channels, 0 | 2 | 6> = { 1: 0, 3: 2, 4: 6 };

/**
 * A blank image of the given size.
 * @param width - pixels
 * @param height - pixels
 * @param channels - 1, 3 or 4
 * @throws CoxaError BAD_ARGUMENT for sizes that are not positive integers
 */
export function createRaster(width: number, height: number, channels: Channels): RasterImage {
  checkSize(width, height);
  return { width, height, channels, data: new Uint8Array(width * height * channels) };
}

/**
 * Encode a raster image as PNG bytes.
 * @param image - grey, RGB or RGBA image
 * @param deflateLevel - zlib level 0..9 (default 9: panels are small, size matters more than time)
 * @returns the PNG file content
 * @throws CoxaError BAD_ARGUMENT when the data length does not match the size
 */
export function encodePng(image: RasterImage, deflateLevel = 9): Buffer {
  checkSize(image.width, image.height);
  const { width, height, channels, data } = image;
  if (COLOR_TYPE[channels] === undefined) {
    throw new CoxaError("BAD_ARGUMENT", `a PNG image needs 1, 3 or 4 channels, not ${channels}`);
  }
  if (data.length !== width * height * channels) {
    throw new CoxaError(
      "BAD_ARGUMENT",
      `image data has ${data.length} bytes but ${width}x${height}x${channels} needs ${width * height * channels}`,
    );
  }
  const colorType = COLOR_TYPE[channels];
  const png = { width, height, data: Buffer.from(data.buffer, data.byteOffset, data.byteLength) };
  return PNG.sync.write(png as unknown as PNG, {
    colorType,
    inputColorType: colorType,
    inputHasAlpha: channels === 4,
    bitDepth: 8,
    deflateLevel,
    // One filter for every row (Paeth, PNG specification 9.4) instead of trying all five per
    // row: the trial costs ~4x the encoding time and wins a few percent of size on our panels.
    filterType: 4,
  });
}

/** `data:image/png;base64,...` URI of PNG bytes, for embedding in a self-contained page. */
export function pngBytesToDataUri(png: Uint8Array): string {
  return `data:image/png;base64,${Buffer.from(png.buffer, png.byteOffset, png.byteLength).toString("base64")}`;
}

/**
 * Encode an image as PNG and return it as a data URI.
 * @param image - grey, RGB or RGBA image
 * @throws CoxaError BAD_ARGUMENT as encodePng
 */
export function pngDataUri(image: RasterImage): string {
  return pngBytesToDataUri(encodePng(image));
}

/**
 * out = the grey image expanded to RGB (each grey byte copied to R, G and B).
 * @param grey - 1-channel image
 * @param out - 3-channel image of the same size; allocated when omitted
 * @throws CoxaError BAD_ARGUMENT for a non-grey input or a size mismatch
 */
export function greyToRgb(grey: RasterImage, out?: RasterImage): RasterImage {
  if (grey.channels !== 1) throw new CoxaError("BAD_ARGUMENT", "greyToRgb needs a 1-channel image");
  const target = out ?? createRaster(grey.width, grey.height, 3);
  if (target.channels !== 3 || target.width !== grey.width || target.height !== grey.height) {
    throw new CoxaError("BAD_ARGUMENT", "greyToRgb output must be a 3-channel image of the same size");
  }
  const src = grey.data;
  const dst = target.data;
  const n = grey.width * grey.height;
  for (let p = 0, q = 0; p < n; p++, q += 3) {
    const v = src[p];
    dst[q] = v;
    dst[q + 1] = v;
    dst[q + 2] = v;
  }
  return target;
}

/** An sRGB colour as three bytes. */
export type Rgb = readonly [number, number, number];

/**
 * Paint `colour` into an RGB(A) image wherever `mask` is non-zero (mask is width * height,
 * row-major like the image). Alpha, when present, is set to 255 on painted pixels.
 * @param image - 3- or 4-channel image, changed in place and returned
 * @param mask - one byte per pixel
 * @param colour - sRGB bytes
 * @param opacity - 0..1 blend of the colour over the existing pixel (1 = replace)
 * @throws CoxaError BAD_ARGUMENT on a grey image or a mask of the wrong length
 */
export function paintMask(image: RasterImage, mask: Uint8Array, colour: Rgb, opacity = 1): RasterImage {
  if (image.channels === 1) throw new CoxaError("BAD_ARGUMENT", "paintMask needs an RGB or RGBA image");
  const n = image.width * image.height;
  if (mask.length !== n) {
    throw new CoxaError("BAD_ARGUMENT", `mask has ${mask.length} pixels but the image has ${n}`);
  }
  const c = image.channels;
  const data = image.data;
  const a = Math.min(1, Math.max(0, opacity));
  const r = colour[0];
  const g = colour[1];
  const b = colour[2];
  for (let p = 0, q = 0; p < n; p++, q += c) {
    if (mask[p] === 0) continue;
    data[q] = Math.round(data[q] + a * (r - data[q]));
    data[q + 1] = Math.round(data[q + 1] + a * (g - data[q + 1]));
    data[q + 2] = Math.round(data[q + 2] + a * (b - data[q + 2]));
    if (c === 4) data[q + 3] = 255;
  }
  return image;
}

function checkSize(width: number, height: number): void {
  if (!Number.isInteger(width) || !Number.isInteger(height) || width < 1 || height < 1) {
    throw new CoxaError("BAD_ARGUMENT", `image size ${width}x${height} is not a positive integer size`);
  }
}
