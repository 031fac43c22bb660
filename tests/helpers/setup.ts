import fc from "fast-check";
import { register } from "tsx/esm/api";
import { afterEach, beforeEach, vi } from "vitest";

// Knex imports migration and seed files with Node's own loader, which needs tsx for .ts.
register();

// Property tests explore new random inputs on developers' machines; CI replays a fixed
// seed so a landing run is repeatable (WALLCAST_FC_SEED overrides it to replay a failure).
const seed = process.env.WALLCAST_FC_SEED ?? (process.env.CI ? "20261201" : undefined);
if (seed) fc.configureGlobal({ seed: Number(seed) });

// House rule: console.error during a test is a failure unless the test expects it
// (a test that expects one replaces the spy with its own `vi.spyOn(console, "error")`).
let errorSpy: ReturnType<typeof vi.spyOn> | undefined;

beforeEach(() => {
  errorSpy = vi.spyOn(console, "error");
});

afterEach(() => {
  const calls = errorSpy?.mock.calls ?? [];
  const expected = (globalThis as { __expectConsoleError?: boolean }).__expectConsoleError;
  errorSpy?.mockRestore();
  if (calls.length > 0 && !expected) {
    throw new Error(
      `console.error was called during the test:\n${calls.map((c: unknown[]) => c.map(String).join(" ")).join("\n")}`,
    );
  }
});
