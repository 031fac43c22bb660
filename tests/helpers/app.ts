import type { Express } from "express";
import type { AppOptions } from "../../server";

/**
 * The real request handler of the production build (build/, made by `npm test`),
 * in-process for supertest. Set DATABASE_URL (and other settings) before calling.
 */
export async function productionApp(options: Omit<AppOptions, "build"> = {}): Promise<Express> {
  const { createApp, loadBuild } = await import("../../server");
  const build = await loadBuild();
  return createApp({ build, logRequests: false, ...options });
}

export async function shutdownApp(): Promise<void> {
  const { loadBuild } = await import("../../server");
  const build = await loadBuild();
  await (build.entry.module as { shutdown?: () => Promise<void> }).shutdown?.();
}
