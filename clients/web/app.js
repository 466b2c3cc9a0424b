// The drawing-search page: draw or paste a shape, ask waymarkd for the nearest stored shapes,
// show them as small drawings, and overlay one on the query with the points where the distance
// is attained. Talks to the same origin's /v1 API only; no external resources.
"use strict";

const SVG_NS = "http://www.w3.org/2000/svg";
const PAD_SIZE = 1000;  // the drawing area's viewBox is 0..PAD_SIZE on both axes

const state = {
  strokes: [],          // each an array of [x, y] in pad coordinates (y down)
  current: null,        // the stroke being drawn
  collections: new Map(),
  lastQuery: null,      // {geometry, collection, metric}
};

const $ = (id) => document.getElementById(id);

// --- talking to the server -------------------------------------------------------------------

async function api(method, path, body) {
  const headers = {};
  const token = $("token").value.trim();
  if (token) headers["Authorization"] = "Bearer " + token;
  if (body !== undefined) headers["Content-Type"] = "application/json";
  let response;
  try {
    response = await fetch(path, {method, headers, body: body === undefined ? undefined : JSON.stringify(body)});
  } catch (error) {
    throw new Error("cannot reach the server (" + error.message + ")");
  }
  const text = await response.text();
  let json = null;
  try { json = JSON.parse(text); } catch (ignored) { /* reported below */ }
  if (!response.ok) {
    const error = json && json.error;
    let message = error ? error.message + (error.where ? " (at " + error.where + ")" : "") : text.slice(0, 200);
    if (response.status === 401) message += " — enter a token under “Access token”.";
    throw new Error("HTTP " + response.status + ": " + message);
  }
  if (json === null) throw new Error("the server's reply is not JSON");
  return json;
}

function showError(message) {
  const element = $("error");
  element.textContent = message;
  element.hidden = !message;
}

async function loadCollections() {
  try {
    const reply = await api("GET", "/v1/collections");
    const select = $("collection");
    select.textContent = "";
    for (const collection of reply.collections) {
      state.collections.set(collection.name, collection);
      const option = document.createElement("option");
      option.value = collection.name;
      option.textContent = collection.name + " (" + collection.stats.shapes + " shapes)";
      select.append(option);
    }
    if (reply.collections.length === 0) {
      $("status").textContent = "No collections yet: load some shapes first (see the README).";
    }
    const preferred = state.collections.has("parts") ? "parts" : (reply.collections[0] || {}).name;
    if (preferred) select.value = preferred;
    onCollectionChange();
    showError("");
  } catch (error) {
    showError(error.message);
  }
}

function currentCollection() { return state.collections.get($("collection").value); }

function onCollectionChange() {
  const collection = currentCollection();
  if (!collection) return;
  $("metric").value = collection.default_metric;
  const [minX, minY, maxX, maxY] = collection.landmarks.domain;
  $("pad-scale").textContent = "The drawing area spans x " + minX + " to " + maxX + ", y " + minY + " to " + maxY +
      " (the collection's landmark domain; frame: " + collection.frame + ").";
}

// --- drawing -----------------------------------------------------------------------------------

function padPoint(event) {
  const pad = $("pad");
  const box = pad.getBoundingClientRect();
  return [(event.clientX - box.left) / box.width * PAD_SIZE, (event.clientY - box.top) / box.height * PAD_SIZE];
}

function redrawPad() {
  const pad = $("pad");
  pad.textContent = "";
  for (let i = 1; i < 10; ++i) {
    const v = i * PAD_SIZE / 10;
    pad.append(svgElement("line", {x1: v, y1: 0, x2: v, y2: PAD_SIZE, class: "grid"}));
    pad.append(svgElement("line", {x1: 0, y1: v, x2: PAD_SIZE, y2: v, class: "grid"}));
  }
  for (const stroke of state.strokes.concat(state.current ? [state.current] : [])) {
    pad.append(svgElement("polyline", {points: stroke.map((p) => p.join(",")).join(" "), class: "stroke"}));
  }
}

function svgElement(name, attributes) {
  const element = document.createElementNS(SVG_NS, name);
  for (const [key, value] of Object.entries(attributes)) element.setAttribute(key, value);
  return element;
}

function setUpPad() {
  const pad = $("pad");
  pad.addEventListener("pointerdown", (event) => {
    event.preventDefault();
    pad.setPointerCapture(event.pointerId);
    state.current = [padPoint(event)];
    redrawPad();
  });
  pad.addEventListener("pointermove", (event) => {
    if (!state.current) return;
    const point = padPoint(event);
    const last = state.current[state.current.length - 1];
    if (Math.hypot(point[0] - last[0], point[1] - last[1]) < 3) return;  // drop jitter between samples
    state.current.push(point);
    redrawPad();
  });
  const finish = () => {
    if (!state.current) return;
    if (state.current.length >= 2) state.strokes.push(state.current);
    state.current = null;
    redrawPad();
  };
  pad.addEventListener("pointerup", finish);
  pad.addEventListener("pointercancel", finish);
  $("undo").addEventListener("click", () => { state.strokes.pop(); redrawPad(); });
  $("clear").addEventListener("click", () => { state.strokes = []; redrawPad(); });
  document.addEventListener("keydown", (event) => {
    if ((event.ctrlKey || event.metaKey) && event.key === "z" && document.activeElement !== $("pasted")) {
      event.preventDefault();
      state.strokes.pop();
      redrawPad();
    }
  });
  redrawPad();
}

// The strokes as a GeoJSON geometry in the collection's coordinates (y up).
function drawingGeometry() {
  const collection = currentCollection();
  const [minX, minY, maxX, maxY] = collection ? collection.landmarks.domain : [0, 0, 1, 1];
  const toDomain = ([x, y]) => [minX + x / PAD_SIZE * (maxX - minX), maxY - y / PAD_SIZE * (maxY - minY)];
  const lines = state.strokes.map((stroke) => stroke.map(toDomain));
  if (lines.length === 1) return {type: "LineString", coordinates: lines[0]};
  return {type: "MultiLineString", coordinates: lines};
}

// --- geometry for display ----------------------------------------------------------------------

// GeoJSON geometry → list of {points: [[x, y]...], closed}.
function partsOf(geometry) {
  const parts = [];
  const add = (points, closed) => parts.push({points, closed});
  switch (geometry.type) {
    case "Point": add([geometry.coordinates], false); break;
    case "MultiPoint": geometry.coordinates.forEach((p) => add([p], false)); break;
    case "LineString": add(geometry.coordinates, false); break;
    case "MultiLineString": geometry.coordinates.forEach((line) => add(line, false)); break;
    case "Polygon": geometry.coordinates.forEach((ring) => add(ring, true)); break;
    case "MultiPolygon": geometry.coordinates.forEach((polygon) => polygon.forEach((ring) => add(ring, true))); break;
    case "GeometryCollection": geometry.geometries.forEach((g) => parts.push(...partsOf(g))); break;
    default: break;
  }
  return parts;
}

function boundsOf(partLists) {
  let minX = Infinity, minY = Infinity, maxX = -Infinity, maxY = -Infinity;
  for (const parts of partLists) {
    for (const part of parts) {
      for (const [x, y] of part.points) {
        minX = Math.min(minX, x); maxX = Math.max(maxX, x);
        minY = Math.min(minY, y); maxY = Math.max(maxY, y);
      }
    }
  }
  return {minX, minY, maxX, maxY};
}

// The frame the server compares shapes in (sketch/geometry/shape.h): centered moves the bounding
// box centre to the origin; unit also scales the longer side to 1.
function placeInFrame(parts, frame) {
  if (frame === "absolute") return parts;
  const b = boundsOf([parts]);
  const cx = (b.minX + b.maxX) / 2, cy = (b.minY + b.maxY) / 2;
  const side = Math.max(b.maxX - b.minX, b.maxY - b.minY);
  const scale = frame === "unit" && side > 0 ? 1 / side : 1;
  return parts.map((part) => ({closed: part.closed, points: part.points.map(([x, y]) => [(x - cx) * scale, (y - cy) * scale])}));
}

// Draws parts into an SVG with a viewBox of 0..1000, fitted to `bounds`, y up.
function viewTransform(bounds) {
  const width = Math.max(bounds.maxX - bounds.minX, 1e-12), height = Math.max(bounds.maxY - bounds.minY, 1e-12);
  const scale = 900 / Math.max(width, height);
  const offsetX = 500 - (bounds.minX + width / 2) * scale, offsetY = 500 + (bounds.minY + height / 2) * scale;
  return ([x, y]) => [x * scale + offsetX, offsetY - y * scale];
}

function drawParts(svg, parts, transform, className) {
  for (const part of parts) {
    const points = part.points.map(transform);
    if (points.length === 1) {
      svg.append(svgElement("circle", {cx: points[0][0], cy: points[0][1], r: 8, class: className}));
    } else {
      svg.append(svgElement(part.closed ? "polygon" : "polyline",
                            {points: points.map((p) => p.join(",")).join(" "), class: className}));
    }
  }
}

// --- searching ---------------------------------------------------------------------------------

function formatDistance(value) {
  if (typeof value !== "number") return String(value);
  return Math.abs(value) >= 1000 || (value !== 0 && Math.abs(value) < 0.001) ? value.toExponential(3) : value.toFixed(3);
}

async function search(geometry) {
  const collection = currentCollection();
  if (!collection) { showError("Choose a collection first."); return; }
  const metric = $("metric").value;
  const mode = document.querySelector("input[name=mode]:checked").value;
  const k = Math.max(1, Math.min(100, parseInt($("k").value, 10) || 8));
  showError("");
  $("detail").hidden = true;
  $("status").textContent = "Searching…";
  const started = performance.now();
  try {
    const answer = await api("POST", "/v1/collections/" + encodeURIComponent(collection.name) + "/nearest",
                             {shape: geometry, k, metric, mode});
    const elapsed = performance.now() - started;
    state.lastQuery = {geometry, collection, metric};
    const stored = await Promise.all(answer.results.map((hit) =>
        api("GET", "/v1/collections/" + encodeURIComponent(collection.name) + "/shapes/" + encodeURIComponent(hit.id))
            .catch(() => null)));
    showResults(answer, stored, elapsed);
  } catch (error) {
    $("status").textContent = "";
    showError(error.message);
  }
}

function showResults(answer, stored, elapsed) {
  const list = $("results");
  list.textContent = "";
  const verdict = answer.certified ? "certified exact" : "not certified";
  $("status").textContent = answer.results.length + " results, " + answer.stats.milliseconds.toFixed(2) +
      " ms on the server (" + elapsed.toFixed(0) + " ms here), " + verdict + ". " + answer.guarantee;
  $("status").dataset.certified = String(answer.certified);
  answer.results.forEach((hit, index) => {
    const item = document.createElement("li");
    const button = document.createElement("button");
    button.type = "button";
    button.className = "result";
    button.setAttribute("aria-label", "Result " + (index + 1) + ": " + hit.id + ", distance " + formatDistance(hit.distance) +
                        ". Show it over your shape.");
    const thumbnail = svgElement("svg", {viewBox: "0 0 1000 1000", class: "thumbnail", "aria-hidden": "true"});
    if (stored[index]) {
      const parts = partsOf(stored[index].geometry);
      drawParts(thumbnail, parts, viewTransform(boundsOf([parts])), "result-shape");
    }
    const title = document.createElement("span");
    title.className = "result-id";
    title.textContent = hit.id;
    const distance = document.createElement("span");
    distance.className = "result-distance";
    distance.textContent = answer.metric + " " + formatDistance(hit.distance);
    const metadata = document.createElement("span");
    metadata.className = "result-metadata";
    metadata.textContent = Object.entries(hit.metadata || {}).map(([key, value]) => key + ": " + value).join(" · ");
    button.append(thumbnail, title, distance, metadata);
    button.addEventListener("click", () => showDetail(hit, stored[index]));
    item.append(button);
    list.append(item);
  });
}

async function showDetail(hit, stored) {
  const query = state.lastQuery;
  const detail = $("detail");
  const overlay = $("overlay");
  overlay.textContent = "";
  $("detail-title").textContent = hit.id;
  detail.hidden = false;
  if (!stored) {
    $("detail-text").textContent = "The stored shape could not be fetched.";
    return;
  }
  const frame = query.collection.frame;
  const queryParts = placeInFrame(partsOf(query.geometry), frame);
  const resultParts = placeInFrame(partsOf(stored.geometry), frame);
  const transform = viewTransform(boundsOf([queryParts, resultParts]));
  drawParts(overlay, resultParts, transform, "result-shape");
  drawParts(overlay, queryParts, transform, "query-shape");
  let text = "Distance " + formatDistance(hit.distance) + " (" + query.metric + "), sketch estimate " +
      formatDistance(hit.sketch_distance) + ". Both shapes are shown in the collection's " + frame + " frame.";
  if (query.metric !== "sketch") {
    try {
      const distance = await api("POST", "/v1/distance",
                                 {a: query.geometry, b: stored.geometry, metric: query.metric, frame});
      const [from, to] = [transform(distance.from), transform(distance.to)];
      overlay.append(svgElement("line", {x1: from[0], y1: from[1], x2: to[0], y2: to[1], class: "witness-line"}));
      overlay.append(svgElement("circle", {cx: from[0], cy: from[1], r: 10, class: "witness"}));
      overlay.append(svgElement("circle", {cx: to[0], cy: to[1], r: 10, class: "witness"}));
      text += " The marked points, one on each shape, are where the distance is attained.";
    } catch (error) {
      text += " (Witness points unavailable: " + error.message + ")";
    }
  }
  text += " Metadata: " + JSON.stringify(hit.metadata);
  $("detail-text").textContent = text;
  detail.focus();
}

// --- pasted shapes and the example ---------------------------------------------------------

function pastedShape() {
  const text = $("pasted").value.trim();
  if (!text) return null;
  if (text.startsWith("{")) {
    const parsed = JSON.parse(text);  // a syntax error is reported by the caller
    return parsed.type === "Feature" ? parsed.geometry : parsed;
  }
  return text;
}

// Pasted WKT is turned into GeoJSON here when it is a simple type, so that results can be drawn
// over it; anything else (SVG path data, curved or unusual WKT) is sent as text for the server to
// parse, and the overlay then shows the stored shape alone.
async function searchPasted() {
  let shape;
  try {
    shape = pastedShape();
  } catch (error) {
    showError("The pasted text starts like JSON but does not parse: " + error.message);
    return;
  }
  if (!shape) { showError("Paste a shape first."); return; }
  if (typeof shape === "string") {
    const geometry = wktToGeometry(shape);
    await search(geometry || shape);
  } else {
    await search(shape);
  }
}

// Enough WKT for display (POLYGON, LINESTRING, MULTI*, POINT); anything else is sent as text.
function wktToGeometry(text) {
  const match = /^\s*(MULTIPOLYGON|MULTILINESTRING|MULTIPOINT|POLYGON|LINESTRING|POINT)\s*(\(.*\))\s*$/is.exec(text);
  if (!match) return null;
  const type = match[1].toUpperCase();
  const json = match[2].replace(/\(/g, "[").replace(/\)/g, "]")
      .replace(/(-?[\d.eE+-]+)\s+(-?[\d.eE+-]+)/g, "[$1,$2]");
  let coordinates;
  try { coordinates = JSON.parse(json); } catch (ignored) { return null; }
  const names = {POINT: "Point", LINESTRING: "LineString", POLYGON: "Polygon", MULTIPOINT: "MultiPoint",
                 MULTILINESTRING: "MultiLineString", MULTIPOLYGON: "MultiPolygon"};
  if (type === "POINT") coordinates = coordinates[0];
  if (type === "MULTIPOINT") coordinates = coordinates.map((c) => (Array.isArray(c[0]) ? c[0] : c));
  return {type: names[type], coordinates};
}

function loadExample() {
  $("pasted").value = "POLYGON ((0 0, 41 0, 41 6.5, 6 6.5, 6 30, 0 30, 0 0))";
  $("pasted").focus();
}

document.addEventListener("DOMContentLoaded", () => {
  setUpPad();
  $("collection").addEventListener("change", onCollectionChange);
  $("token").value = sessionStorage.getItem("waymark-token") || "";
  $("token").addEventListener("change", () => { sessionStorage.setItem("waymark-token", $("token").value); loadCollections(); });
  $("search-drawing").addEventListener("click", () => {
    if (state.strokes.length === 0) { showError("Draw at least one stroke first."); return; }
    search(drawingGeometry());
  });
  $("search-pasted").addEventListener("click", searchPasted);
  $("example").addEventListener("click", loadExample);
  $("detail-close").addEventListener("click", () => { $("detail").hidden = true; });
  $("settings").addEventListener("submit", (event) => event.preventDefault());
  loadCollections();
});
