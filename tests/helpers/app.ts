import type { Express } from "express";

/**
 * The real request handler of the production build (build/, made by `npm test`),
 * in-process for supertest. Set DATABASE_URL (and other settings) before calling.
 */
export async function productionApp(): Promise<Express> {
  const { createApp, loadBuild } = await import("../../server");
  const build = await loadBuild();
  return createApp({ build, logRequests: false });
}

export async function shutdownApp(): Promise<void> {
  const { loadBuild } = await import("../../server");
  const build = await loadBuild();
  await (build.entry.module as { shutdown?: () => Promise<void> }).shutdown?.();
}
