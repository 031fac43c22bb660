import { register } from "tsx/esm/api";
import { afterEach, beforeEach, vi } from "vitest";

// Knex imports migration and seed files with Node's own loader, which needs tsx for .ts.
register();

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
    throw new Error(`console.error was called during the test:\n${calls.map((c: unknown[]) => c.map(String).join(" ")).join("\n")}`);
  }
});
