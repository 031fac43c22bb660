import { defineConfig } from "vitest/config";

// Vitest runs without the React Router Vite plugin: route modules are not compiled
// here; the HTTP and browser tests use the production build instead.
// `npm test` (tests/run.ts) starts the services these projects need and sets their
// addresses in the environment.
export default defineConfig({
  test: {
    setupFiles: ["tests/helpers/setup.ts"],
    projects: [
      {
        extends: true,
        test: { name: "unit", include: ["tests/unit/**/*.test.ts"], testTimeout: 30_000, sequence: { groupOrder: 0 } },
      },
      {
        // The site-time helpers again, with the process in a zone that is not UTC and keeps
        // daylight-saving time, so nothing leans on the server's own zone.
        extends: true,
        test: {
          name: "unit-tz",
          include: ["tests/unit/services/time.test.ts"],
          env: { TZ: "America/New_York", WALLCAST_EXPECT_LOCAL_TZ: "1" },
          testTimeout: 30_000,
          sequence: { groupOrder: 0 },
        },
      },
      {
        extends: true,
        test: {
          name: "integration",
          include: ["tests/integration/**/*.test.ts"],
          testTimeout: 30_000,
          hookTimeout: 60_000,
          // each file gets its own database; four at a time is plenty on two cores
          maxWorkers: 4,
          sequence: { groupOrder: 1 },
        },
      },
      {
        extends: true,
        test: {
          name: "http",
          include: ["tests/http/**/*.test.ts"],
          testTimeout: 30_000,
          hookTimeout: 60_000,
          sequence: { groupOrder: 2 },
        },
      },
      {
        extends: true,
        test: {
          name: "e2e",
          include: ["tests/e2e/**/*.test.ts"],
          testTimeout: 120_000,
          hookTimeout: 120_000,
          fileParallelism: false,
          sequence: { groupOrder: 3 },
        },
      },
    ],
  },
  resolve: { alias: { "~": new URL("./app", import.meta.url).pathname } },
  // Resolve packages the way Node 20.19+ does (the "module-sync" condition), so the tests
  // load the same single copy of react-router as the production server and its bundle.
  ssr: { resolve: { conditions: ["module-sync"], externalConditions: ["module-sync"] } },
});
