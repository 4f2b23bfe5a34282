/**
 * Entry point of a batch case process (forked by ./pool.ts from dist/batch/case-process.js):
 * receives one case task over IPC, runs it (./case.ts with coxa align's library function),
 * sends progress and the outcome back, and exits. If the parent goes away (its IPC channel
 * closes, e.g. the batch was killed), the process exits at once without writing a marker, so
 * the case is redone by a later --resume.
 */
import { alignPair } from "../register/align.js";
import { type CaseTask, oneLine, runCase } from "./case.js";
import type { CaseProcessMessage } from "./pool.js";

function send(message: CaseProcessMessage): Promise<void> {
  return new Promise((resolveSend) => {
    if (!process.send || !process.connected) {
      resolveSend();
      return;
    }
    process.send(message, undefined, {}, () => resolveSend());
  });
}

process.on("disconnect", () => process.exit(130));

process.once("message", async (m: { type: "task"; task: CaseTask }) => {
  if (m?.type !== "task") process.exit(2);
  const task = m.task;
  let lastSent = 0;
  try {
    const outcome = await runCase(task, alignPair, (event) => {
      const now = Date.now();
      if (now - lastSent < 200 && event.fraction !== 1) return;
      lastSent = now;
      void send({
        type: "progress",
        name: task.name,
        event: { stage: event.stage, fraction: event.fraction },
      });
    });
    await send({ type: "result", outcome });
    process.exit(0);
  } catch (err) {
    process.stderr.write(`${oneLine(String((err as Error)?.stack ?? err))}\n`);
    process.exit(1);
  }
});
