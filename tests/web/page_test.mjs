// The drawing-search page in a real browser: Debian's chromium, driven by playwright-core,
// against a real waymarkd holding the invented demo catalogue. Draws a stroke with the mouse,
// searches, checks the results against the API's own answer, opens the overlay, searches a
// pasted shape with the keyboard only, and checks the phone layout. Screenshots go to OUTPUT.
//
// Usage: node page_test.mjs WAYMARKD WAYMARK OUTPUT_DIRECTORY
import {spawn, execFileSync} from "node:child_process";
import {mkdtempSync, mkdirSync, rmSync} from "node:fs";
import {tmpdir} from "node:os";
import {join} from "node:path";
import {chromium} from "playwright-core";

const [waymarkd, waymark, output] = process.argv.slice(2);
if (!waymarkd || !waymark || !output) {
  console.error("usage: node page_test.mjs WAYMARKD WAYMARK OUTPUT_DIRECTORY");
  process.exit(2);
}
mkdirSync(output, {recursive: true});
const work = mkdtempSync(join(tmpdir(), "waymark-page-"));
const token = "page-test-token-0123456789";
let passed = 0, failed = 0;
function check(description, condition, detail = "") {
  if (condition) { ++passed; } else { ++failed; console.log("FAILED: " + description + (detail ? " — " + detail : "")); }
}

const server = spawn(waymarkd, ["--data-directory", join(work, "data"), "--port", "0"],
                     {env: {...process.env, WAYMARK_WRITE_TOKENS: token}, stdio: ["ignore", "pipe", "pipe"]});
let log = "";
server.stdout.on("data", (chunk) => { log += chunk; });
server.stderr.on("data", (chunk) => { log += chunk; });
let browser = null;

async function main() {
  let address = null;
  for (let i = 0; i < 300 && !address; ++i) {
    const found = /listening on (http:\/\/[^\s]+)/.exec(log);
    if (found) address = found[1]; else await new Promise((resolve) => setTimeout(resolve, 100));
  }
  if (!address) throw new Error("waymarkd did not start:\n" + log);
  const authorization = {Authorization: "Bearer " + token};
  for (let i = 0; i < 100; ++i) {
    if ((await fetch(address + "/readyz")).ok) break;
    await new Promise((resolve) => setTimeout(resolve, 100));
  }
  let reply = await fetch(address + "/v1/collections/parts", {
    method: "PUT", headers: {...authorization, "Content-Type": "application/json"},
    body: JSON.stringify({frame: "centered", landmarks: {layout: "grid", count: 64, domain: [-80, -80, 80, 80]}})});
  check("collection created", reply.status === 201, String(reply.status));
  const catalogue = execFileSync(waymark, ["demo-catalogue", "--count", "600"]);
  reply = await fetch(address + "/v1/collections/parts/shapes",
                      {method: "POST", headers: {...authorization, "Content-Type": "application/x-ndjson"}, body: catalogue});
  check("catalogue loaded", (await reply.json()).accepted === 600);

  browser = await chromium.launch({executablePath: "/usr/bin/chromium", headless: true, args: ["--no-sandbox"]});
  const page = await browser.newPage({viewport: {width: 1280, height: 900}});
  const foreign = [];
  page.on("request", (request) => { if (!request.url().startsWith(address)) foreign.push(request.url()); });
  const consoleErrors = [];
  page.on("console", (message) => { if (message.type() === "error") consoleErrors.push(message.text()); });
  page.on("pageerror", (error) => consoleErrors.push(String(error)));

  await page.goto(address + "/");
  await page.waitForSelector("#collection option[value=parts]", {state: "attached"});
  check("the parts collection is offered", (await page.inputValue("#collection")) === "parts");
  check("the drawing area states its extent", (await page.textContent("#pad-scale")).includes("-80 to 80"));

  // Draw an L: down the left side, then along the bottom (pad y grows downward).
  const box = await page.locator("#pad").boundingBox();
  const at = (x, y) => [box.x + box.width * x, box.y + box.height * y];
  await page.mouse.move(...at(0.40, 0.30));
  await page.mouse.down();
  for (let t = 0; t <= 1.0001; t += 0.1) await page.mouse.move(...at(0.40, 0.30 + 0.35 * t));
  for (let t = 0; t <= 1.0001; t += 0.1) await page.mouse.move(...at(0.40 + 0.3 * t, 0.65));
  await page.mouse.up();
  check("the stroke is drawn", (await page.locator("#pad polyline.stroke").count()) === 1);
  await page.fill("#k", "6");
  await page.click("#search-drawing");
  await page.waitForSelector("#results li", {timeout: 20000});
  const shownIds = await page.locator("#results .result-id").allTextContents();
  check("k results shown", shownIds.length === 6, String(shownIds.length));
  check("each result has a drawing", (await page.locator("#results .thumbnail polygon, #results .thumbnail polyline").count()) >= 6);
  check("the status gives the time", /ms on the server/.test(await page.textContent("#status")));

  // The page must show what the API answers for the same geometry.
  const drawn = await page.evaluate(() => drawingGeometry());
  reply = await fetch(address + "/v1/collections/parts/nearest", {method: "POST", headers: {"Content-Type": "application/json"},
                                                                  body: JSON.stringify({shape: drawn, k: 6, mode: "fast"})});
  const apiIds = (await reply.json()).results.map((hit) => hit.id);
  check("the page shows the API's answer, in order", JSON.stringify(apiIds) === JSON.stringify(shownIds),
        JSON.stringify(apiIds) + " vs " + JSON.stringify(shownIds));
  await page.screenshot({path: join(output, "page-results.png"), fullPage: true});

  await page.locator("#results button.result").first().click();
  await page.waitForSelector("#overlay circle.witness", {timeout: 20000});
  check("the overlay shows both shapes",
        (await page.locator("#overlay .query-shape").count()) >= 1 && (await page.locator("#overlay .result-shape").count()) >= 1);
  check("the overlay marks two witness points", (await page.locator("#overlay circle.witness").count()) === 2);
  check("the overlay names the result", (await page.textContent("#detail-title")) === shownIds[0]);
  await page.screenshot({path: join(output, "page-overlay.png"), fullPage: true});

  // Keyboard only: the example fills the paste box; exact mode; Tab to the search button.
  await page.focus("#example");
  await page.keyboard.press("Enter");
  check("the example fills the paste box", (await page.inputValue("#pasted")).startsWith("POLYGON"));
  await page.check("input[name=mode][value=exact]");
  await page.focus("#pasted");
  await page.keyboard.press("Tab");
  check("Tab reaches the search button", await page.evaluate(() => document.activeElement.id === "search-pasted"));
  await page.keyboard.press("Enter");
  await page.waitForFunction(() => /certified exact/.test(document.getElementById("status").textContent), null, {timeout: 20000});
  check("exact answers are marked certified", (await page.getAttribute("#status", "data-certified")) === "true");

  // Errors from the server are shown, not swallowed.
  await page.fill("#pasted", "POLYGON ((0 0, 1 0");
  await page.click("#search-pasted");
  await page.waitForSelector("#error:not([hidden])", {timeout: 20000});
  check("a bad shape shows the server's message", /HTTP 400/.test(await page.textContent("#error")));

  // Phone: nothing wider than the screen.
  await page.setViewportSize({width: 390, height: 844});
  await page.reload();
  await page.waitForSelector("#collection option[value=parts]", {state: "attached"});
  const overflow = await page.evaluate(() => document.documentElement.scrollWidth - window.innerWidth);
  check("no sideways scrolling on a phone-sized screen", overflow <= 0, "overflow " + overflow + " px");
  await page.screenshot({path: join(output, "page-phone.png"), fullPage: true});

  check("no request leaves the server's origin", foreign.length === 0, foreign.join(", "));
  check("no script errors", consoleErrors.filter((text) => !/status of 400/.test(text)).length === 0, consoleErrors.join(" | "));
}

try {
  await main();
} catch (error) {
  ++failed;
  console.log("FAILED: " + (error.stack || error));
} finally {
  if (browser) await browser.close();
  server.kill("SIGTERM");
  await new Promise((resolve) => server.on("exit", resolve));
  rmSync(work, {recursive: true, force: true});
}
console.log(`page test: ${passed} passed, ${failed} failed; screenshots in ${output}`);
process.exit(failed === 0 ? 0 : 1);
