/** Done-markers: canonical settings hash and the resume decision. */
import { createHash } from "node:crypto";
import { mkdirSync, writeFileSync } from "node:fs";
import { join } from "node:path";
import { describe, expect, it } from "vitest";
import {
  canonicalJson,
  checkComplete,
  DONE_MARKER,
  hashInputs,
  recordOutputs,
  settingsHash,
} from "../../src/batch/marker.js";
import { writeJsonAtomic } from "../../src/common/atomic.js";
import { tempDir } from "../helpers/tmp.js";

const root = tempDir("coxa-marker-");

describe("canonicalJson / settingsHash", () => {
  it("sorts keys at every level and drops undefined, so key order never changes the hash", () => {
    expect(canonicalJson({ b: 1, a: { d: [1, { z: 1, y: 2 }], c: null }, e: undefined })).toBe(
      '{"a":{"c":null,"d":[1,{"y":2,"z":1}]},"b":1}',
    );
    expect(settingsHash({ x: 1, y: [2] })).toBe(settingsHash({ y: [2], x: 1 }));
    expect(settingsHash({ x: 1 })).not.toBe(settingsHash({ x: 2 }));
    // SHA-256 of the canonical text (FIPS 180-4 via node:crypto as the independent implementation).
    expect(settingsHash({ a: 1 })).toBe(createHash("sha256").update('{"a":1}').digest("hex"));
  });
});

describe("checkComplete", () => {
  async function makeCase(name: string) {
    const dir = join(root, name);
    mkdirSync(dir, { recursive: true });
    const fixed = join(root, `${name}-ct.txt`);
    writeFileSync(fixed, "ct data");
    writeFileSync(join(dir, "transform.json"), "{}");
    writeFileSync(join(dir, "summary.json"), '{"verdict":"pass"}');
    const inputs = await hashInputs({ fixed });
    const outputs = await recordOutputs(dir, ["transform.json", "summary.json"]);
    writeJsonAtomic(join(dir, DONE_MARKER), {
      format: "coxa.case-done",
      version: 1,
      case: name,
      inputs,
      settings_sha256: "s1",
      outputs,
    });
    return { dir, fixed, inputs };
  }

  it("complete when marker, input hashes, settings and output hashes all match", async () => {
    const c = await makeCase("ok");
    expect(c.inputs.fixed?.sha256).toBe(createHash("sha256").update("ct data").digest("hex"));
    expect(await checkComplete(c.dir, c.inputs, "s1")).toMatchObject({ complete: true });
  });

  it("not complete: no marker, other settings, a changed or added input, a missing output", async () => {
    const c = await makeCase("a");
    expect(await checkComplete(join(root, "nowhere"), c.inputs, "s1")).toEqual({
      complete: false,
      reason: "no done-marker",
    });
    expect((await checkComplete(c.dir, c.inputs, "s2")).reason).toBe("settings changed");
    writeFileSync(c.fixed, "ct data, edited");
    const now = await hashInputs({ fixed: c.fixed });
    expect((await checkComplete(c.dir, now, "s1")).reason).toMatch(/^input fixed changed/);
    const more = await hashInputs({ fixed: c.fixed, moving: c.fixed });
    expect((await checkComplete(c.dir, { ...c.inputs, moving: more.moving }, "s1")).reason).toBe(
      "input moving added or removed",
    );
    const d = await makeCase("b");
    writeFileSync(join(d.dir, "summary.json"), '{"verdict":"fail"}');
    expect((await checkComplete(d.dir, d.inputs, "s1")).reason).toBe("output summary.json changed");
    // Same size, other bytes: caught by the hash, not by the size check.
    const e = await makeCase("c");
    writeFileSync(join(e.dir, "summary.json"), '{"verdict":"PASS"}');
    expect((await checkComplete(e.dir, e.inputs, "s1", "size")).complete).toBe(true);
    expect((await checkComplete(e.dir, e.inputs, "s1", "sha256")).reason).toBe("output summary.json changed");
    const f = await makeCase("d");
    writeFileSync(join(f.dir, "transform.json"), "");
    expect((await checkComplete(f.dir, f.inputs, "s1", "size")).reason).toBe(
      "output transform.json changed size",
    );
  });

  it("a marker that is not a coxa record does not count", async () => {
    const c = await makeCase("junk");
    writeFileSync(join(c.dir, DONE_MARKER), "{not json");
    expect((await checkComplete(c.dir, c.inputs, "s1")).complete).toBe(false);
    writeFileSync(join(c.dir, DONE_MARKER), '{"format":"other"}');
    expect((await checkComplete(c.dir, c.inputs, "s1")).reason).toBe("done-marker is not a coxa case record");
  });
});
