#!/usr/bin/env bash
# Solve an external reference case with piezomap and compare its heads with the case's direct solution.
#
#   bench/crosscheck-reference.sh CASE_DIR [METHOD...]        # default METHOD: auto
#   bench/crosscheck-reference.sh /tmp/bref/cases/N512 auto pcg-ic0
#
# CASE_DIR holds K.tif (conductivity GeoTIFF) and case.json (thickness, fixed-head west/east columns, wells,
# recharge), and optionally heads_spsolve.npy or heads_spsolve.tif (direct solution, NaN/nodata on inactive
# cells) and system.bin (assembled system; only its unknown count is read). These come from the general-purpose
# reference solvers described in bench/README.md; nothing of them is copied here.
#
# Environment: TOLERANCE (default 1e-10), WORK (default /tmp/piezomap-crosscheck/<case folder name>).
# Needs a build (`npx tsc -p tsconfig.json`) and GNU time at /usr/bin/time (peak RSS).
# Prints one line per method: setup s, solve s, iterations, relative residual, peak RSS, budget discrepancy,
# unknowns (piezomap / case / system.bin) and max |h - h_ref|, max |h - h_ref| / |h_ref| over cells active in both.
# head.tif is Float32, so differences below about 4e-6 m (half a Float32 step at 64-128 m) are not resolved; the
# count of cells whose head.tif value differs from the reference rounded to Float32 shows how close below that.
set -euo pipefail

[ $# -ge 1 ] || { sed -n '2,5p' "$0" >&2; exit 2; }
CASE="$(cd "$1" && pwd)"; shift
METHODS=("${@:-auto}")
[ ${#METHODS[@]} -gt 0 ] || METHODS=(auto)
TOLERANCE="${TOLERANCE:-1e-10}"
WORK="${WORK:-/tmp/piezomap-crosscheck/$(basename "$CASE")}"
REPO="$(cd "$(dirname "$0")/.." && pwd)"
[ -f "$CASE/case.json" ] && [ -f "$CASE/K.tif" ] || { echo "$CASE: needs case.json and K.tif" >&2; exit 2; }
[ -f "$REPO/dist/src/index.js" ] || { echo "no build: run npx tsc -p tsconfig.json in $REPO" >&2; exit 2; }
[ -x /usr/bin/time ] || { echo "/usr/bin/time (GNU time) is needed for peak RSS" >&2; exit 2; }
mkdir -p "$WORK"
cd "$REPO"

# 1. Scenario from case.json: the edge name follows the fixed column (0 = west, nx-1 = east).
node --input-type=module -e '
import { readFileSync, writeFileSync } from "node:fs";
const [caseDir, out] = process.argv.slice(1);
const c = JSON.parse(readFileSync(`${caseDir}/case.json`, "utf8"));
const edge = (f) => {
  if (f.column === 0) return "west";
  if (f.column === c.nx - 1) return "east";
  throw new Error(`case.json: fixed head ${f.name} on column ${f.column} is not an outer column`);
};
const scenario = {
  title: `reference case ${caseDir.split("/").pop()}`,
  units: { length: c.length_units ?? "m", time: c.time_units ?? "d" },
  aquifer: { conductivity: `${caseDir}/${c.raster ?? "K.tif"}`, thickness: c.thickness_m,
             anisotropy: c.anisotropy_ky_over_kx ?? 1 },
  fixedHeads: c.fixed_heads.map((f) => ({ name: f.name, edge: edge(f), head: f.head_m })),
  recharge: c.recharge_m_per_d ?? 0,
  wells: c.wells.map((w) => ({ id: w.id, x: w.x, y: w.y, rate: w.rate_m3_per_d })),
};
writeFileSync(out, JSON.stringify(scenario, null, 1));
' "$CASE" "$WORK/scenario.json"

read -r load_start _ < /proc/loadavg
echo "case $CASE, tolerance $TOLERANCE, load average at start $load_start ($(getconf _NPROCESSORS_ONLN) CPUs)" >&2

for m in "${METHODS[@]}"; do
  out="$WORK/out-$m"
  if ! /usr/bin/time -v node bin/piezomap.js solve "$WORK/scenario.json" -o "$out" --method "$m" \
      --tolerance "$TOLERANCE" --no-maps --json --overwrite --quiet > "$WORK/summary-$m.json" 2> "$WORK/time-$m.txt"; then
    echo "$m: piezomap failed, see $WORK/time-$m.txt" >&2
    continue
  fi
  # 2. Compare head.tif with the direct solution; read .npy (little-endian float64, C order) without numpy.
  node --input-type=module -e '
import { readFileSync, existsSync, openSync, readSync, closeSync } from "node:fs";
import { fromFile } from "geotiff";
const [caseDir, out, summaryFile, timeFile, method] = process.argv.slice(1);
const s = JSON.parse(readFileSync(summaryFile, "utf8"));
const c = JSON.parse(readFileSync(`${caseDir}/case.json`, "utf8"));
const rssKiB = Number(/Maximum resident set size \(kbytes\): (\d+)/.exec(readFileSync(timeFile, "utf8"))?.[1] ?? NaN);

function readNpy(path) {
  const buf = readFileSync(path);
  if (buf.toString("latin1", 1, 6) !== "NUMPY") throw new Error(`${path}: not a .npy file`);
  const major = buf[6];
  const hlen = major === 1 ? buf.readUInt16LE(8) : buf.readUInt32LE(8);
  const start = major === 1 ? 10 + hlen : 12 + hlen;
  const header = buf.toString("latin1", start - hlen, start);
  if (!/<f8/.test(header) || /fortran_order.: True/.test(header)) throw new Error(`${path}: expected <f8, C order`);
  const data = new Float64Array(buf.byteLength - start >> 3);
  for (let i = 0; i < data.length; i++) data[i] = buf.readDoubleLE(start + 8 * i);
  return data;
}
async function readTif(path) {
  const img = await (await fromFile(path)).getImage();
  const nodata = img.getGDALNoData();
  const r = await img.readRasters({ interleave: true });
  const v = new Float64Array(r.length);
  for (let i = 0; i < r.length; i++) v[i] = nodata !== null && r[i] === nodata ? NaN : r[i];
  return v;
}

let ref = null, refName = "none";
if (existsSync(`${caseDir}/heads_spsolve.npy`)) { ref = readNpy(`${caseDir}/heads_spsolve.npy`); refName = "heads_spsolve.npy"; }
else if (existsSync(`${caseDir}/heads_spsolve.tif`)) { ref = await readTif(`${caseDir}/heads_spsolve.tif`); refName = "heads_spsolve.tif"; }
const h = await readTif(`${out}/head.tif`);

let maxAbs = NaN, maxRel = NaN, at = -1, onlyOurs = 0, onlyRef = 0, both = 0, notRounded = 0;
if (ref) {
  if (ref.length !== h.length) throw new Error(`size differs: head.tif ${h.length} cells, ${refName} ${ref.length}`);
  maxAbs = 0; maxRel = 0;
  for (let i = 0; i < h.length; i++) {
    const a = Number.isNaN(h[i]), b = Number.isNaN(ref[i]);
    if (a && b) continue;
    if (a) { onlyRef++; continue; }
    if (b) { onlyOurs++; continue; }
    both++;
    const d = Math.abs(h[i] - ref[i]);
    if (d > maxAbs) { maxAbs = d; at = i; }
    const r = d / Math.abs(ref[i]);
    if (r > maxRel) maxRel = r;
    if (h[i] !== Math.fround(ref[i])) notRounded++;
  }
}
let systemN = null;
if (existsSync(`${caseDir}/system.bin`)) {
  const fd = openSync(`${caseDir}/system.bin`, "r"); const b = Buffer.alloc(16); readSync(fd, b, 0, 16, 0); closeSync(fd);
  if (b.toString("latin1", 0, 8) === "GWCSR01\n") systemN = Number(b.readBigInt64LE(8));
}
const g = s.grid, sv = s.solver;
const rec = {
  case: caseDir, method, ran: sv.method, unknowns: g.unknowns, caseUnknowns: c.stats?.unknowns ?? null, systemUnknowns: systemN,
  activeCells: g.activeCells, caseActiveCells: c.stats?.active_cells ?? null,
  setupSeconds: sv.setupSeconds, solveSeconds: sv.seconds, iterations: sv.iterations,
  relativeResidual: sv.relativeResidual, converged: sv.converged, peakRssMiB: rssKiB / 1024,
  budgetDiscrepancyPercent: s.budget.discrepancyPercent, reference: refName,
  maxAbsHeadDiff: maxAbs, maxRelHeadDiff: maxRel, worstCell: at < 0 ? null : { row: Math.floor(at / g.nx), col: at % g.nx },
  cellsCompared: both, cellsNotEqualToFloat32Reference: notRounded, activeOnlyInPiezomap: onlyOurs, activeOnlyInReference: onlyRef,
};
console.log(JSON.stringify(rec));
const e = (x) => (Number.isFinite(x) ? x.toExponential(2) : "-");
console.error(
  `${method} (${sv.method}): setup ${sv.setupSeconds.toFixed(3)} s, solve ${sv.seconds.toFixed(3)} s, ` +
  `${sv.iterations} iterations, rel. residual ${e(sv.relativeResidual)} (on h - datum), peak RSS ${(rssKiB / 1024).toFixed(0)} MiB, ` +
  `budget ${e(s.budget.discrepancyPercent)} %\n` +
  `  unknowns: piezomap ${g.unknowns}, case.json ${rec.caseUnknowns}, system.bin ${systemN ?? "-"}` +
  `${rec.caseUnknowns !== null && rec.caseUnknowns !== g.unknowns ? "  MISMATCH" : ""}\n` +
  `  vs ${refName}: max |dh| ${e(maxAbs)} m, max |dh|/|h| ${e(maxRel)} over ${both} cells; ` +
  `${notRounded} cells differ from the reference rounded to Float32` +
  `${onlyOurs + onlyRef ? `; active only in piezomap ${onlyOurs}, only in reference ${onlyRef}` : ""}`);
' "$CASE" "$out" "$WORK/summary-$m.json" "$WORK/time-$m.txt" "$m" | tee -a "$WORK/crosscheck.jsonl"
done

read -r load_end _ < /proc/loadavg
echo "load average at end $load_end; records appended to $WORK/crosscheck.jsonl" >&2
