/**
 * Scenario validation, text formats, CRS handling and variant merging, without files.
 * The contract checked is ../shared/spec/interface.md, section "Scenario file". Loading from files is in
 * scenario-load.test.ts.
 */
import { execFileSync } from 'node:child_process';
import { describe, expect, it } from 'vitest';
import { PiezomapError } from '../../src/errors.js';
import { linearUnitOf, makeTransform, parseEpsg, projectionFor } from '../../src/crs.js';
import { mergeVariant } from '../../src/scenario/merge.js';
import { closest, parseScenarioJson, type ScenarioJson } from '../../src/scenario/schema.js';
import { findJsonSyntaxError, lineColumn, parseCsv } from '../../src/scenario/text.js';

const minimal = {
  aquifer: { conductivity: 'k.tif', thickness: 20 },
  fixedHeads: [{ edge: 'west', head: 100 }],
};

function errorsOf(json: unknown): string[] {
  const result = parseScenarioJson(json, 'scenario.json', 50);
  if (result.ok) throw new Error('expected validation to fail');
  return result.message.split('\n');
}

function valid(json: unknown): ScenarioJson {
  const result = parseScenarioJson(json, 'scenario.json');
  if (!result.ok) throw new Error(result.message);
  return result.scenario;
}

function thrownBy(action: () => unknown): PiezomapError {
  try {
    action();
  } catch (thrown) {
    if (thrown instanceof PiezomapError) return thrown;
    throw thrown;
  }
  throw new Error('expected a PiezomapError');
}

describe('parseScenarioJson', () => {
  it('accepts the contract example and applies the documented defaults', () => {
    // The example of interface.md, section "Scenario file" (paths only; nothing is read here).
    const scenario = valid({
      title: 'Example wellfield, baseline',
      units: { length: 'm', time: 'd' },
      aquifer: { conductivity: 'k.tif', thickness: 20, anisotropy: 1.0 },
      fixedHeads: [{ raster: 'river_stage.tif' }, { edge: 'west', head: 100.0 }],
      recharge: 0.0,
      wells: [{ id: 'W1', x: 512300.0, y: 4103400.0, rate: -500.0 }],
      pointCrs: 'EPSG:4326',
      observations: [{ id: 'OB1', x: 512000.0, y: 4103000.0, head: 97.2 }],
      solver: { method: 'auto', tolerance: 1e-8, maxIterations: 20000 },
      variants: [{ name: 'expanded', wells: [{ id: 'W2', x: 512800.0, y: 4103100.0, rate: -750.0 }] }],
    });
    expect(scenario.fixedHeads).toHaveLength(2);
    expect(scenario.variants?.[0]?.name).toBe('expanded');
    const defaults = valid({ ...minimal, solver: {} });
    expect(defaults.aquifer.anisotropy).toBe(1);
    expect(defaults.solver).toEqual({ method: 'auto', tolerance: 1e-8, maxIterations: 20000 });
  });

  it('names an unknown key with its path and suggests the likely key', () => {
    const lines = errorsOf({ ...minimal, aquifer: { conductivty: 'k.tif', thickness: 20 } });
    expect(lines).toContain('scenario.json: aquifer.conductivty: unknown key (did you mean "conductivity"?)');
    expect(lines).toContain('scenario.json: aquifer.conductivity: required key is missing (expected a string)');
    expect(errorsOf({ ...minimal, titel: 'x' })).toEqual(['scenario.json: titel: unknown key (did you mean "title"?)']);
    // Far from every key: the allowed keys are listed instead of a guess.
    expect(errorsOf({ ...minimal, solver: { banana: 1 } })[0]).toBe(
      'scenario.json: solver.banana: unknown key (allowed here: method, tolerance, maxIterations, relaxation, threads)',
    );
  });

  it('names type errors with the key path, inside lists too', () => {
    const lines = errorsOf({
      ...minimal,
      wells: [
        { id: 'W1', x: 1, y: 2, rate: -5 },
        { id: 'W2', x: 1, y: 2, rate: '-5' },
      ],
      recharge: true,
    });
    expect(lines).toContain('scenario.json: wells[1].rate: expected a number, got the string "-5"');
    expect(lines).toContain('scenario.json: recharge: expected a recharge rate (length/time) or the path of a GeoTIFF, got true');
  });

  it('reports every problem, one line each, capped', () => {
    const json = {
      aquifer: { conductivity: 'k.tif', thickness: -1 },
      fixedHeads: [],
      units: { length: 'meters' },
      solver: { tolerance: 2, maxIterations: 1.5, relaxation: 2 },
      pointCrs: 'WGS84',
    };
    const lines = errorsOf(json);
    expect(lines).toEqual([
      'scenario.json: units.length: expected one of "m", "ft", got the string "meters"',
      'scenario.json: aquifer.thickness: must be > 0 (got -1)',
      'scenario.json: fixedHeads: needs at least one entry: without a fixed head (or a head-dependent boundary or leakage) the head is undetermined',
      'scenario.json: pointCrs: must be an EPSG code such as "EPSG:4326"',
      'scenario.json: solver.tolerance: must be < 1 (got 2)',
      'scenario.json: solver.maxIterations: expected a whole number, got 1.5',
      'scenario.json: solver.relaxation: must be < 2 (got 2)',
    ]);
    const capped = parseScenarioJson(json, 'scenario.json', 4);
    expect(capped.ok).toBe(false);
    if (!capped.ok) {
      expect(capped.message.split('\n')).toHaveLength(4);
      expect(capped.message).toContain('... and 4 more problems');
      expect(capped.issueCount).toBe(7);
    }
  });

  it('refuses non-finite numbers (JSON.parse turns 1e400 into Infinity)', () => {
    expect(
      errorsOf(JSON.parse(`{"aquifer": {"conductivity": "k.tif", "thickness": 1e400}, "fixedHeads": [{"edge": "west", "head": -1e400}]}`)),
    ).toEqual([
      'scenario.json: aquifer.thickness: expected a number, got Infinity',
      'scenario.json: fixedHeads[0].head: expected a number, got -Infinity',
    ]);
  });

  it('refuses a top level that is not an object', () => {
    expect(errorsOf([minimal])).toEqual(['scenario.json: top level: expected an object { ... }, got a list']);
  });

  it('tells fixed-head entries apart by their key and validates each kind', () => {
    const lines = errorsOf({
      ...minimal,
      fixedHeads: [{ edge: 'wst', head: 1 }, { raster: 5 }, { head: 3 }, { raster: 'r.tif', head: 2 }, { edge: 'east' }],
    });
    expect(lines).toEqual([
      'scenario.json: fixedHeads[0].edge: expected one of "west", "east", "north", "south", got the string "wst"',
      'scenario.json: fixedHeads[1].raster: expected a string, got 5',
      'scenario.json: fixedHeads[2]: expected { "raster": PATH }, { "edge": "west"|"east"|"north"|"south", "head": H } or { "shape": GEOJSON, "head": H | "headProperty": NAME }, got an object',
      'scenario.json: fixedHeads[3].head: unknown key (allowed here: raster, name)',
      'scenario.json: fixedHeads[4].head: required key is missing (expected a number)',
    ]);
  });

  it('accepts wells and observations as a CSV path, and an optional positive well radius', () => {
    const scenario = valid({ ...minimal, wells: 'wells.csv', observations: 'obs.csv' });
    expect(scenario.wells).toBe('wells.csv');
    expect(valid({ ...minimal, wells: [{ id: 'W1', x: 0, y: 0, rate: -1, radius: 0.15 }] }).wells).toEqual([
      { id: 'W1', x: 0, y: 0, rate: -1, radius: 0.15 },
    ]);
    expect(errorsOf({ ...minimal, wells: [{ id: 'W1', x: 0, y: 0, rate: -1, radius: 0 }] })).toEqual([
      'scenario.json: wells[0].radius: must be > 0 (got 0)',
    ]);
    expect(errorsOf({ ...minimal, wells: 12 })).toEqual([
      'scenario.json: wells: expected a list of wells or the path of a CSV or GeoJSON file, got 12',
    ]);
  });

  it('takes a whole-number id as text, and refuses an empty one', () => {
    expect(valid({ ...minimal, wells: [{ id: 7, x: 0, y: 0, rate: -1 }] }).wells).toEqual([{ id: '7', x: 0, y: 0, rate: -1 }]);
    expect(errorsOf({ ...minimal, wells: [{ id: ' ', x: 0, y: 0, rate: -1 }] })).toEqual(['scenario.json: wells[0].id: must not be empty']);
    expect(errorsOf({ ...minimal, observations: [{ id: 1.5, x: 0, y: 0, head: 1 }] })).toEqual([
      'scenario.json: observations[0].id: expected a string, got 1.5',
    ]);
  });

  it('refuses duplicate well and observation ids', () => {
    const lines = errorsOf({
      ...minimal,
      wells: [
        { id: 'W1', x: 0, y: 0, rate: -1 },
        { id: 'W1', x: 5, y: 0, rate: -1 },
      ],
      observations: [
        { id: 'OB', x: 0, y: 0, head: 1 },
        { id: 'OB', x: 0, y: 0, head: 1 },
      ],
    });
    expect(lines).toEqual([
      'scenario.json: wells[1].id: duplicate well id "W1" (also at [0])',
      'scenario.json: observations[1].id: duplicate observation id "OB" (also at [0])',
    ]);
  });

  it('checks variant names: pattern, reserved "baseline", unique; variants cannot nest', () => {
    const lines = errorsOf({
      ...minimal,
      variants: [
        { name: 'baseline' },
        { name: 'a b' },
        { name: 'wet', variants: [] },
        { name: 'WET' },
        { name: 'dry', aquifer: { thickness: 'x' } },
      ],
    });
    expect(lines).toEqual([
      'scenario.json: variants[0].name: "baseline" is reserved for the scenario itself',
      'scenario.json: variants[1].name: must use only letters, digits, "-" and "_" (it names a result folder)',
      'scenario.json: variants[2].variants: unknown key (allowed here: name, title, units, aquifer, fixedHeads, recharge, headDependent, leakage, wells, pointCrs, groundSurface, observations, receptors, solver, tracking)',
      'scenario.json: variants[4].aquifer.conductivity: required key is missing (expected a string)',
    ]);
    expect(errorsOf({ ...minimal, variants: [{ name: 'wet' }, { name: 'WET' }] })).toEqual([
      'scenario.json: variants[1].name: duplicate variant name "WET" (also variants[0])',
    ]);
  });

  it('lets a variant well entry give only the fields it changes', () => {
    const scenario = valid({ ...minimal, variants: [{ name: 'off', wells: [{ id: 'W1', rate: 0 }] }] });
    expect(scenario.variants?.[0]?.wells).toEqual([{ id: 'W1', rate: 0 }]);
  });
});

describe('closest', () => {
  it('suggests within about one edit per three letters, transpositions counting once', () => {
    expect(closest('conductivty', ['conductivity', 'thickness'])).toBe('conductivity');
    expect(closest('thcikness', ['conductivity', 'thickness'])).toBe('thickness');
    expect(closest('Recharge', ['recharge'])).toBe('recharge');
    expect(closest('zzz', ['recharge', 'wells'])).toBeNull();
  });
});

describe('findJsonSyntaxError', () => {
  it('gives the line and column of the first syntax error', () => {
    const text = '{\n  "title": "x",\n  "recharge": 0.001\n  "wells": []\n}';
    expect(findJsonSyntaxError(text)).toEqual({
      line: 4,
      column: 3,
      problem: 'expected "," or "}" after a value, found the string "wells"',
    });
    expect(findJsonSyntaxError('[1 2]')?.problem).toBe('expected "," or "]" after a value, found "2"');
    expect(findJsonSyntaxError('{"a" 1}')?.problem).toBe('expected ":" after a key, found "1"');
    expect(findJsonSyntaxError('{\n  "a": 1,\n}')).toEqual({ line: 2, column: 9, problem: 'trailing comma before "}"' });
    expect(findJsonSyntaxError('{"a": tru}')?.column).toBe(7);
    expect(findJsonSyntaxError('{"path": "C:\\data\\k.tif"}')?.problem).toMatch(/bad escape/);
    expect(findJsonSyntaxError('{"a": 1')?.problem).toBe('the file ends inside an object (missing "}")');
    expect(findJsonSyntaxError('')?.problem).toBe('the file is empty (expected a JSON object)');
    expect(findJsonSyntaxError("{'a': 1}")?.problem).toBe('keys need double quotes ("), not single quotes');
    expect(findJsonSyntaxError('{"a": 01}')?.problem).toMatch(/malformed number/);
  });

  it('finds a key repeated in one object only when asked', () => {
    const text = '{\n  "wells": [],\n  "aquifer": {"a": 1, "b": {"a": 2}},\n  "wells": "w.csv"\n}';
    expect(findJsonSyntaxError(text)).toBeNull();
    expect(findJsonSyntaxError(text, { duplicateKeys: true })).toEqual({
      line: 4,
      column: 3,
      problem: 'the key "wells" appears twice in the same object',
    });
    expect(findJsonSyntaxError('{"a": {"x": 1}, "b": {"x": 1}, "\\u0061": 2}', { duplicateKeys: true })?.problem).toBe(
      'the key "a" appears twice in the same object',
    );
  });

  it('agrees with JSON.parse on what is valid (RFC 8259 grammar)', () => {
    const samples = [
      '{}',
      '[]',
      '{"a":[1,-2.5e3,true,false,null,"\\u00e9\\n"]}',
      ' \n{"a" : { "b" : [ ] } }\r\n',
      '"x"',
      '1',
      '{"a":1,}',
      '[1 2]',
      '{"a":-}',
      '[.5]',
      '[1.]',
      '{"a":"\t"}',
    ];
    for (const sample of samples) {
      let parses = true;
      try {
        JSON.parse(sample);
      } catch {
        parses = false;
      }
      expect(findJsonSyntaxError(sample) === null, sample).toBe(parses);
    }
  });

  it('counts lines after a byte-order mark without counting the mark as a column', () => {
    expect(lineColumn('\ufeff{"a"}', 5)).toEqual({ line: 1, column: 5 });
  });
});

describe('parseCsv', () => {
  it('reads quoted fields, doubled quotes, CRLF, a BOM and skips blank lines (RFC 4180)', () => {
    const text = '\ufeffid,x,y,rate\r\n"W,1",1,2,-3\r\n\r\n"say ""hi""",4,5,6\r\n';
    expect(parseCsv(text)).toEqual([
      { line: 1, fields: ['id', 'x', 'y', 'rate'] },
      { line: 2, fields: ['W,1', '1', '2', '-3'] },
      { line: 4, fields: ['say "hi"', '4', '5', '6'] },
    ]);
  });

  it('keeps a line break inside quotes and numbers records by their first line', () => {
    expect(parseCsv('id,note\n"a","two\nlines"\nb,c')).toEqual([
      { line: 1, fields: ['id', 'note'] },
      { line: 2, fields: ['a', 'two\nlines'] },
      { line: 4, fields: ['b', 'c'] },
    ]);
  });

  it('reports an unclosed quote with its line', () => {
    expect(() => parseCsv('id,x\n"a,1\n')).toThrow(/line 2/);
  });
});

describe('crs', () => {
  it('parses EPSG codes', () => {
    expect(parseEpsg('EPSG:32633')).toBe(32633);
    expect(parseEpsg(' epsg : 4326 ')).toBe(4326);
    expect(parseEpsg('WGS84')).toBeNull();
  });

  it('transforms WGS 84 lon/lat to UTM zone 33N as GDAL does', () => {
    // Reference: GDAL 3.6.2, `echo "15.5 45.2" | gdaltransform -s_srs EPSG:4326 -t_srs EPSG:32633 -output_xy`
    // printed 539270.307445004 5005289.84167271 (gdaltransform takes lon/lat order here).
    const t = makeTransform(4326, 32633);
    const p = t.forward(15.5, 45.2, 'test point');
    expect(p.x).toBeCloseTo(539270.307445004, 3);
    expect(p.y).toBeCloseTo(5005289.84167271, 3);
    expect(t.from.geographic).toBe(true);
    expect(t.to.geographic).toBe(false);
  });

  it('resolves a code proj4 does not carry from the offline epsg-index files', () => {
    // EPSG:2154 (RGF93 / Lambert-93) is not built into proj4. Reference: GDAL 3.6.2,
    // `echo "2 50" | gdaltransform -s_srs EPSG:4326 -t_srs EPSG:2154 -output_xy` printed 628239.253934976 6989509.4112699.
    const projection = projectionFor(2154);
    expect(projection.definition).toContain('+proj=lcc');
    expect(projection.name).toContain('Lambert-93');
    const p = makeTransform(4326, 2154).forward(2, 50, 'test point');
    expect(p.x).toBeCloseTo(628239.253934976, 2);
    expect(p.y).toBeCloseTo(6989509.4112699, 2);
  });

  it('matches gdaltransform live for a few points when GDAL is installed', () => {
    let gdal: string;
    try {
      gdal = execFileSync('gdaltransform', ['-s_srs', 'EPSG:4326', '-t_srs', 'EPSG:32633', '-output_xy'], {
        input: '12.1 0.5\n17.9 60.25\n15 84\n',
        encoding: 'utf8',
      });
    } catch {
      return; // GDAL not installed: the literal references above still run.
    }
    const expected = gdal
      .trim()
      .split('\n')
      .map((line) => line.trim().split(/\s+/).map(Number));
    const t = makeTransform(4326, 32633);
    const points: Array<[number, number]> = [
      [12.1, 0.5],
      [17.9, 60.25],
      [15, 84],
    ];
    points.forEach(([lon, lat], k) => {
      const p = t.forward(lon, lat, `point ${k}`);
      expect(Math.abs(p.x - expected[k]![0]!)).toBeLessThan(1e-3);
      expect(Math.abs(p.y - expected[k]![1]!)).toBeLessThan(1e-3);
    });
  });

  it('refuses an unknown code, a non-horizontal CRS and a definition needing a grid-shift file', () => {
    expect(thrownBy(() => projectionFor(99999)).message).toBe('EPSG:99999 is not a known EPSG code');
    expect(thrownBy(() => projectionFor(5703)).message).toMatch(/not a horizontal coordinate reference system/); // a vertical CRS
    const shift = thrownBy(() => projectionFor(27700));
    expect(shift.code).toBe('input');
    expect(shift.message).toMatch(/needs the datum grid-shift file "OSTN15_NTv2_OSGBtoETRS.gsb"/);
  });

  it('knows the linear unit of projected codes (epsg-index "unit" field) and none for geographic ones', () => {
    expect(linearUnitOf(32633)).toBe('metre');
    expect(linearUnitOf(2154)).toBe('metre');
    expect(linearUnitOf(2227)).toMatch(/US survey foot/i); // NAD83 / California zone 3 (ftUS)
    expect(linearUnitOf(4326)).toBeUndefined();
    expect(linearUnitOf(99999)).toBeUndefined();
  });

  it('refuses coordinates that are not lon/lat for a geographic source instead of returning nonsense', () => {
    const t = makeTransform(4326, 32633);
    const error = thrownBy(() => t.forward(512300, 4103400, 'well "W1" (wells[0])'));
    expect(error.message).toMatch(/^well "W1" \(wells\[0\]\): \(512300, 4103400\) is not a longitude\/latitude pair/);
  });

  it('never returns non-finite coordinates', () => {
    // Web Mercator is undefined at the pole: proj4 gives an infinite northing there.
    const t = makeTransform(4326, 3857);
    expect(thrownBy(() => t.forward(0, 90, 'pole')).message).toMatch(/has no valid position/);
  });
});

describe('mergeVariant', () => {
  const base = valid({
    ...minimal,
    title: 'Base',
    recharge: 0.001,
    wells: [
      { id: 'W1', x: 10, y: 20, rate: -100 },
      { id: 'W2', x: 30, y: 40, rate: -200, radius: 0.2 },
    ],
    variants: [{ name: 'v', recharge: 0.002 }],
  });

  it('replaces top-level keys the variant gives and keeps the others', () => {
    const merged = mergeVariant(base, { name: 'v', recharge: 0.002, solver: { method: 'sor', tolerance: 1e-6, maxIterations: 10 } });
    expect(merged.recharge).toBe(0.002);
    expect(merged.solver).toEqual({ method: 'sor', tolerance: 1e-6, maxIterations: 10 });
    expect(merged.aquifer).toEqual(base.aquifer);
    expect(merged.title).toBe('Base');
    expect(merged.wells).toBe(base.wells);
    expect(merged.variants).toBeUndefined();
    expect(base.recharge).toBe(0.001); // the baseline is not changed
  });

  it('stacks variant wells on the baseline wells, to merge by id when resolved', () => {
    const merged = mergeVariant(base, {
      name: 'v',
      wells: [
        { id: 'W1', rate: 0 },
        { id: 'W3', x: 1, y: 2, rate: -5 },
      ],
    });
    expect(merged.wells).toEqual({
      layers: [
        { source: 'wells', wells: base.wells },
        {
          source: 'variants "v".wells',
          wells: [
            { id: 'W1', rate: 0 },
            { id: 'W3', x: 1, y: 2, rate: -5 },
          ],
        },
      ],
    });
    const csvBase = { ...base, wells: 'wells.csv' };
    expect(mergeVariant(csvBase, { name: 'v', wells: 'more.csv' }).wells).toEqual({
      layers: [
        { source: 'wells', wells: 'wells.csv' },
        { source: 'variants "v".wells', wells: 'more.csv' },
      ],
    });
  });
});
