import { defineConfig } from "vitest/config";
import { shared } from "./vitest.shared.js";

export default defineConfig({
  test: { ...shared, include: ["test/**/*.system.test.ts"] },
});
