import { chromium } from "playwright-core";
const [,, email, path, out, width="1280"] = process.argv;
const ctx = await chromium.launchPersistentContext("/tmp/shotprof-"+email, { executablePath: "/usr/bin/chromium", viewport: { width: Number(width), height: 900 } });
const page = ctx.pages()[0] ?? await ctx.newPage();
await page.goto(`http://127.0.0.1:3000/auth/login?login_hint=${email}`);
await page.waitForLoadState("networkidle");
await page.goto(`http://127.0.0.1:3000${path}`);
await page.waitForLoadState("networkidle");
if (process.env.CLICK) { await page.getByRole("button", { name: process.env.CLICK }).click(); await page.waitForLoadState("networkidle"); }
await page.screenshot({ path: out, fullPage: true });
await ctx.close();
