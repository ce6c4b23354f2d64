// Drives the burstbook review page in headless Debian chromium with the keyboard only,
// as a person would: label, comment, skip, finish. Prints what it saw as JSON.
// Usage: node review.mjs URL CHROMIUM_PATH
import { chromium } from "playwright-core";

const [url, executablePath] = process.argv.slice(2);
const browser = await chromium.launch({
  executablePath,
  headless: true,
  args: [
    "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
    "--disable-background-networking", "--disable-component-update", "--disable-sync",
  ],
});
const seen = { ids: [], plotWidths: [], flashes: [] };
try {
  const page = await browser.newPage({ viewport: { width: 1280, height: 1000 } });
  await page.goto(url);
  await page.waitForFunction(() => document.body.dataset.ready === "1", null, { timeout: 20000 });
  const plotWidth = async () => {
    await page.waitForFunction(() => {
      const img = document.getElementById("plot");
      return img.complete && img.naturalWidth > 0;
    }, null, { timeout: 30000 });
    return page.evaluate(() => document.getElementById("plot").naturalWidth);
  };
  const saved = (n) =>
    page.waitForFunction((k) => document.body.dataset.saved === String(k), n, { timeout: 10000 });
  const current = () => page.evaluate(() => Number(document.body.dataset.id));

  seen.ids.push(await current());
  seen.plotWidths.push(await plotWidth());
  await page.keyboard.press("a");
  await saved(1);
  seen.flashes.push(await page.textContent("#flash"));

  seen.ids.push(await current());
  await page.keyboard.press("c");
  await page.keyboard.type("two peaks, maybe a reflection");
  await page.keyboard.press("Enter");
  await page.keyboard.press("i");
  await saved(2);
  seen.flashes.push(await page.textContent("#flash"));

  seen.ids.push(await current());
  await page.keyboard.press("s");
  seen.ids.push(await current());
  seen.plotWidths.push(await plotWidth());
  await page.keyboard.press("u");
  await saved(3);
  seen.flashes.push(await page.textContent("#flash"));

  await page.keyboard.press("k");
  seen.ids.push(await current());
  await page.screenshot({ path: process.env.REVIEW_SCREENSHOT || "/dev/null" }).catch(() => {});
  await page.keyboard.press("q");
  await page.waitForFunction(() => document.body.dataset.quit === "1", null, { timeout: 10000 });
} finally {
  await browser.close();
}
console.log(JSON.stringify(seen));
