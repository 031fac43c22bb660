import js from "@eslint/js";
import tseslint from "typescript-eslint";

// Layer boundaries (see DEVELOPERS.md, "Layout"). In a flat config the last block that
// sets a rule for a file wins, so each block below lists every boundary of its folder.

/** Only the calculation library's public entry: `~/domain`, `../domain/index.ts`, never its inner modules. */
const domainEntryOnly = {
  regex: String.raw`^(~|\.{1,2}(/\.\.)*)/domain/(?!index(\.ts)?$).+`,
  message: "Import the calculation library through app/domain/index.ts (`~/domain/index.ts`), not its inner modules.",
};
/** Adapters know no models. */
const noModels = {
  regex: String.raw`^(~|\.{1,2}(/\.\.)*)/models(/|$)`,
  message:
    "Services are adapters: they may not import app/models (the models call the services, not the other way round).",
};
/** Shared UI ships to the browser: nothing from a .server module, not even types. */
const noServerModules = {
  regex: String.raw`\.server(\.[cm]?[jt]sx?)?$`,
  message:
    "Components run in the browser: do not import .server modules (not even `import type`); move shared types to a client-safe module.",
};

export default tseslint.config(
  { ignores: ["build/**", ".react-router/**", ".data/**", "test-results/**", "node_modules/**"] },
  js.configs.recommended,
  ...tseslint.configs.recommended,
  {
    rules: {
      "@typescript-eslint/no-explicit-any": "off", // tests and scripts; the app is stricter below
      "@typescript-eslint/no-unused-vars": ["error", { argsIgnorePattern: "^_", varsIgnorePattern: "^_" }],
    },
  },
  {
    // Typed rows and values in the app: no `any`.
    files: ["app/**/*.{ts,tsx}"],
    rules: { "@typescript-eslint/no-explicit-any": "error" },
  },
  {
    // The calculation library stays pure: no framework, no I/O, relative imports only.
    files: ["app/domain/**/*.ts"],
    rules: {
      "no-restricted-imports": ["error", { patterns: ["~/*", "react", "react-router", "node:*", "knex", "pg", "zod"] }],
    },
  },
  {
    files: ["app/**/*.{ts,tsx}"],
    ignores: ["app/domain/**", "app/services/**", "app/components/**"],
    rules: { "no-restricted-imports": ["error", { patterns: [domainEntryOnly] }] },
  },
  {
    files: ["app/services/**/*.{ts,tsx}"],
    rules: { "no-restricted-imports": ["error", { patterns: [domainEntryOnly, noModels] }] },
  },
  {
    files: ["app/components/**/*.{ts,tsx}"],
    rules: { "no-restricted-imports": ["error", { patterns: [domainEntryOnly, noServerModules] }] },
  },
);
