/**
 * The scenario file's JSON, as zod (v4) schemas: strict objects (unknown keys refused, with a "did you mean"),
 * types, ranges and enumerations. The contract is ../shared/spec/interface.md, section "Scenario file".
 *
 * Top-level keys carry no defaults here, so that a variant (which replaces top-level keys) can tell "not given"
 * from "given"; the baseline's defaults are applied when the scenario is resolved (load.ts). Nested defaults
 * (solver settings, anisotropy, units) are applied by the schema.
 */
import * as z from 'zod';
import { describeIssues } from './issues.js';

/** A strict object: each unknown key is refused with a suggestion (see unknownKeyText). */
function strict<S extends z.ZodRawShape>(shape: S) {
  const known = Object.keys(shape);
  return z.strictObject(shape, {
    error: (issue) => {
      if (issue.code !== 'unrecognized_keys') return undefined;
      // One line per unknown key, in the order of issue.keys; issues.ts puts each key's path in front.
      return issue.keys.map((key) => unknownKeyText(key, known)).join('\n');
    },
  });
}

/**
 * A value whose schema depends on what it is (a number or a path, a list or a CSV path, which key an entry has).
 * Unlike a zod union, the issues reported are those of the one schema that applies, with their paths.
 */
function dispatch<T>(expected: string, pick: (value: unknown) => z.ZodType<T> | undefined) {
  return z.unknown().transform((value, ctx): T => {
    const schema = pick(value);
    if (!schema) {
      ctx.addIssue({ code: 'custom', message: `expected ${expected}`, input: value });
      return z.NEVER;
    }
    const result = schema.safeParse(value);
    if (!result.success) {
      for (const issue of result.error.issues) ctx.addIssue({ ...issue } as Parameters<typeof ctx.addIssue>[0]);
      return z.NEVER;
    }
    return result.data;
  });
}

/** zod 4's number refuses NaN and +-Infinity. */
const finite = z.number();
const filePath = z.string().trim().min(1, { error: 'must be a file path, not empty' });
const nonEmpty = z.string().trim().min(1, { error: 'must not be empty' });
/** Well and observation ids: text; a whole number (as GIS exports often write ids) is taken as its text. */
const identifier = z.preprocess((value) => (typeof value === 'number' && Number.isInteger(value) ? String(value) : value), nonEmpty);

/** number | path: e.g. thickness (a number must be > 0) and recharge (any finite number). */
function numberOrPath(numberSchema: z.ZodType<number>, expected: string) {
  return dispatch<number | string>(expected, (value) =>
    typeof value === 'number' ? numberSchema : typeof value === 'string' ? filePath : undefined,
  );
}

/** list | CSV path, for point lists; ids unique within an inline list. */
function listOrCsv<T extends { id: string }>(entry: z.ZodType<T>, what: string) {
  const list = z.array(entry).superRefine((entries, ctx) => {
    const seen = new Map<string, number>();
    entries.forEach((item, index) => {
      const first = seen.get(item.id);
      if (first !== undefined) {
        ctx.addIssue({ code: 'custom', path: [index, 'id'], message: `duplicate ${what} id "${item.id}" (also at [${first}])` });
      } else {
        seen.set(item.id, index);
      }
    });
  });
  return dispatch<T[] | string>(`a list of ${what}s or the path of a CSV or GeoJSON file`, (value) =>
    Array.isArray(value) ? list : typeof value === 'string' ? filePath : undefined,
  );
}

export const unitsSchema = strict({
  length: z.enum(['m', 'ft']).default('m'),
  time: z.enum(['s', 'd']).default('d'),
});

export const aquiferSchema = strict({
  /** confined (default: thickness given), unconfined or convertible (thickness from the heads, top and bottom). */
  type: z.enum(['confined', 'unconfined', 'convertible']).optional(),
  conductivity: filePath,
  thickness: numberOrPath(finite.gt(0), 'a thickness > 0 or the path of a GeoTIFF').optional(),
  anisotropy: finite.gt(0).default(1),
  /** GeoJSON files whose shapes mark inactive cells (polygons: cells whose centre lies inside; lines: cells crossed). */
  inactiveShapes: z.array(filePath).optional(),
  /** Effective porosity, for the average linear velocity; number in (0, 1] or a GeoTIFF. Optional. */
  porosity: numberOrPath(finite.gt(0).lte(1), 'a porosity in (0, 1] or the path of a GeoTIFF').optional(),
  /** Elevation of the aquifer top (base of the confining layer), for the sanity warnings. Optional. */
  top: numberOrPath(finite, 'an elevation (length) or the path of a GeoTIFF').optional(),
  /** Elevation of the aquifer bottom, for the sanity warnings. Optional. */
  bottom: numberOrPath(finite, 'an elevation (length) or the path of a GeoTIFF').optional(),
  /** Starting heads of the outer iteration of unconfined and convertible aquifers. Optional. */
  initialHead: numberOrPath(finite, 'a head (length) or the path of a GeoTIFF').optional(),
}).superRefine((aquifer, ctx) => {
  // Which keys each type needs: ../shared/spec/interface.md ("Extensions").
  const type = aquifer.type ?? 'confined';
  if (type === 'confined') {
    if (aquifer.thickness === undefined)
      ctx.addIssue({ code: 'custom', path: ['thickness'], message: 'is required for a confined aquifer (type "confined", the default)' });
    if (aquifer.initialHead !== undefined)
      ctx.addIssue({
        code: 'custom',
        path: ['initialHead'],
        message: 'applies only to unconfined and convertible aquifers (a confined solve needs no starting heads)',
      });
    return;
  }
  const an = type === 'unconfined' ? 'an' : 'a';
  if (aquifer.thickness !== undefined) {
    ctx.addIssue({
      code: 'custom',
      path: ['thickness'],
      message: `must not be given for ${an} ${type} aquifer: its saturated thickness comes from the heads, top and bottom`,
    });
  }
  if (aquifer.bottom === undefined) ctx.addIssue({ code: 'custom', path: ['bottom'], message: `is required for ${an} ${type} aquifer` });
  if (type === 'convertible' && aquifer.top === undefined)
    ctx.addIssue({ code: 'custom', path: ['top'], message: 'is required for a convertible aquifer' });
});

export const edgeNames = ['west', 'east', 'north', 'south'] as const;
export type EdgeName = (typeof edgeNames)[number];

const groupName = nonEmpty.optional();

export const fixedHeadRasterSchema = strict({ raster: filePath, name: groupName });
export const fixedHeadEdgeSchema = strict({ edge: z.enum(edgeNames), head: finite, name: groupName });
/** GeoJSON polygons/lines (docs/scenario-shapes.md): one head for all features, or a property per feature. */
export const fixedHeadShapeSchema = strict({
  shape: filePath,
  head: finite.optional(),
  headProperty: nonEmpty.optional(),
  name: groupName,
}).superRefine((entry, ctx) => {
  if ((entry.head === undefined) === (entry.headProperty === undefined)) {
    ctx.addIssue({
      code: 'custom',
      path: [entry.head === undefined ? 'head' : 'headProperty'],
      message:
        entry.head === undefined
          ? 'a shape needs "head" (one head for every feature) or "headProperty" (the feature property holding each head)'
          : 'give either "head" or "headProperty", not both',
    });
  }
});

/**
 * A fixed-head entry is told apart by the key it has; a later kind (e.g. a GeoJSON shape) is one more line here.
 * When an entry has more than one of these keys, the first one listed wins and the other is refused as unknown.
 */
const fixedHeadKinds = {
  raster: fixedHeadRasterSchema,
  edge: fixedHeadEdgeSchema,
  shape: fixedHeadShapeSchema,
} as const;

export const fixedHeadSchema = dispatch<FixedHeadEntry>(
  '{ "raster": PATH }, { "edge": "west"|"east"|"north"|"south", "head": H } or { "shape": GEOJSON, "head": H | "headProperty": NAME }',
  (value) => {
    if (typeof value !== 'object' || value === null || Array.isArray(value)) return undefined;
    for (const [key, schema] of Object.entries(fixedHeadKinds)) {
      if (key in value) return schema as z.ZodType<FixedHeadEntry>;
    }
    return undefined;
  },
);

/**
 * A head-dependent boundary (../shared/spec/physics.md): located like a fixed head (`raster` of stages/levels,
 * `edge` + `head`, or `shape` + `head`/`headProperty`), with `conductance` (number or raster) or, for shapes,
 * `leakance` (and `width` for lines). `bottom`/`bottomProperty` only for rivers.
 */
export const headDependentSchema = strict({
  name: nonEmpty,
  kind: z.enum(['linear', 'river', 'drain']),
  raster: filePath.optional(),
  edge: z.enum(edgeNames).optional(),
  shape: filePath.optional(),
  head: finite.optional(),
  headProperty: nonEmpty.optional(),
  conductance: numberOrPath(
    finite.gte(0, { error: 'a conductance cannot be negative' }),
    'a conductance >= 0 (length²/time per cell) or the path of a GeoTIFF',
  ).optional(),
  leakance: finite.gte(0, { error: 'a leakance cannot be negative' }).optional(),
  width: finite.gt(0).optional(),
  bottom: numberOrPath(finite, 'a bed-bottom elevation or the path of a GeoTIFF').optional(),
  bottomProperty: nonEmpty.optional(),
}).superRefine((entry, ctx) => {
  const places = (['raster', 'edge', 'shape'] as const).filter((key) => entry[key] !== undefined);
  if (places.length !== 1) {
    ctx.addIssue({
      code: 'custom',
      path: places.length ? [places[1]!] : [],
      message: places.length
        ? `give one of "raster", "edge" or "shape", not ${places.map((k) => `"${k}"`).join(' and ')}`
        : 'needs a location: "raster" (stages or levels), "edge" with "head", or "shape" with "head" or "headProperty"',
    });
    return;
  }
  const place = places[0]!;
  if (place === 'raster' && (entry.head !== undefined || entry.headProperty !== undefined)) {
    ctx.addIssue({
      code: 'custom',
      path: [entry.head !== undefined ? 'head' : 'headProperty'],
      message: 'a raster entry takes its stages or levels from the raster; remove this key',
    });
  }
  if (place === 'edge' && entry.head === undefined)
    ctx.addIssue({ code: 'custom', path: ['head'], message: 'an edge needs "head" (its stage or level)' });
  if (place === 'edge' && entry.headProperty !== undefined)
    ctx.addIssue({ code: 'custom', path: ['headProperty'], message: '"headProperty" is for shapes only' });
  if (place === 'shape' && (entry.head === undefined) === (entry.headProperty === undefined)) {
    ctx.addIssue({
      code: 'custom',
      path: [entry.head === undefined ? 'head' : 'headProperty'],
      message: 'a shape needs "head" or "headProperty", not both and not neither',
    });
  }
  if (place !== 'shape' && (entry.leakance !== undefined || entry.width !== undefined || entry.bottomProperty !== undefined)) {
    const key = entry.leakance !== undefined ? 'leakance' : entry.width !== undefined ? 'width' : 'bottomProperty';
    ctx.addIssue({ code: 'custom', path: [key], message: `"${key}" is for shapes only; give "conductance" per cell` });
  }
  if ((entry.conductance === undefined) === (entry.leakance === undefined)) {
    ctx.addIssue({
      code: 'custom',
      path: [entry.conductance === undefined ? 'conductance' : 'leakance'],
      message:
        entry.conductance === undefined
          ? 'needs "conductance" (length²/time per cell), or for a shape "leakance" (1/time)'
          : 'give either "conductance" or "leakance", not both',
    });
  }
  if (entry.kind !== 'river' && (entry.bottom !== undefined || entry.bottomProperty !== undefined)) {
    ctx.addIssue({
      code: 'custom',
      path: [entry.bottom !== undefined ? 'bottom' : 'bottomProperty'],
      message: `only a river has a bed bottom (this entry is a ${entry.kind})`,
    });
  }
  if (entry.bottom !== undefined && entry.bottomProperty !== undefined)
    ctx.addIssue({ code: 'custom', path: ['bottomProperty'], message: 'give either "bottom" or "bottomProperty", not both' });
});

/** Areal leakage through a confining bed: Q = L·A·(Hs - h). */
export const leakageSchema = strict({
  name: nonEmpty.optional(),
  sourceHead: numberOrPath(finite, 'a head (length) or the path of a GeoTIFF'),
  leakance: numberOrPath(finite.gte(0, { error: 'a leakance cannot be negative' }), 'a leakance >= 0 (1/time) or the path of a GeoTIFF'),
});

export const wellSchema = strict({
  id: identifier,
  x: finite,
  y: finite,
  rate: finite,
  radius: finite.gt(0).optional(),
  /** Lowest acceptable well-bore head (e.g. pump intake or aquifer top); a warning when the well-bore head falls below. */
  minimumHead: finite.optional(),
});

/** In a variant, a well entry with the id of a baseline well changes only the fields it gives. */
export const wellChangeSchema = strict({
  id: identifier,
  x: finite.optional(),
  y: finite.optional(),
  rate: finite.optional(),
  radius: finite.gt(0).optional(),
  minimumHead: finite.optional(),
});

export const observationSchema = strict({
  id: identifier,
  x: finite,
  y: finite,
  head: finite,
});

/** Points where drawdown matters to others (neighbours' wells, springs, wetland edges); `crs` overrides pointCrs for this point. */
export const receptorSchema = strict({
  id: identifier,
  x: finite,
  y: finite,
  crs: z
    .string()
    .regex(/^\s*EPSG\s*:\s*\d{3,6}\s*$/i, { error: 'must be an EPSG code such as "EPSG:4326"' })
    .optional(),
});

export const solverSchema = strict({
  method: z
    .string()
    .regex(/^[A-Za-z0-9_-]+$/, { error: 'must be a method name (letters, digits, "-", "_"), e.g. "auto"' })
    .default('auto'),
  tolerance: finite.gt(0).lt(1).default(1e-8),
  maxIterations: z.int().gt(0).default(20000),
  relaxation: finite.gt(0).lt(2).optional(),
  /** Threads of the solve: a whole number (1 = single-threaded) or "auto" (the default: see solvers/team.ts). */
  threads: z.union([z.int().gte(1).lte(256), z.literal('auto')], { error: 'must be a whole number from 1 to 256 or "auto"' }).optional(),
});

/** A point tracked forward (a spill site, a field); in pointCrs like the other point lists. */
export const trackingPointSchema = strict({
  id: identifier,
  x: finite,
  y: finite,
});

/**
 * Particle tracking (../shared/spec/interface.md `tracking`): backward capture zones of every withdrawal well for
 * each capture time plus the steady zone, and forward tracks from points. Needs aquifer.porosity (checked when
 * the scenario is resolved, where the aquifer is known).
 */
export const trackingSchema = strict({
  captureTimes: z.array(finite.gt(0, { error: 'must be a capture time > 0 (time units)' })).default([]),
  particlesPerWell: z.int().gte(0).lte(10000).default(36),
  points: z
    .array(trackingPointSchema)
    .superRefine((entries, ctx) => {
      const seen = new Map<string, number>();
      entries.forEach((item, index) => {
        const first = seen.get(item.id);
        if (first !== undefined)
          ctx.addIssue({ code: 'custom', path: [index, 'id'], message: `duplicate tracking point id "${item.id}" (also at [${first}])` });
        else seen.set(item.id, index);
      });
    })
    .default([]),
  maxTime: finite.gt(0, { error: 'must be a time limit > 0 (time units)' }).optional(),
});

export const pointCrsSchema = z.string().regex(/^\s*EPSG\s*:\s*\d{3,6}\s*$/i, { error: 'must be an EPSG code such as "EPSG:4326"' });

/**
 * Marks a `fixedHeads: []` beside head-dependent boundaries or leakage, which may hold the level instead
 * (../shared/spec/physics.md); whether every region is held is checked at assembly (the connected-region rule).
 */
const OTHER_ANCHORS = Symbol('fixedHeads may be empty: other terms anchor the level');

function markOtherAnchors(value: unknown): unknown {
  if (typeof value !== 'object' || value === null || Array.isArray(value)) return value;
  const v = value as Record<string, unknown>;
  const others = (Array.isArray(v.headDependent) && v.headDependent.length > 0) || (typeof v.leakage === 'object' && v.leakage !== null);
  if (!others || !Array.isArray(v.fixedHeads) || v.fixedHeads.length > 0) return value;
  return { ...v, fixedHeads: Object.assign([], { [OTHER_ANCHORS]: true }) };
}

/** The fixed-head list: at least one entry, unless marked by markOtherAnchors. */
function fixedHeadList() {
  const list = z.array(fixedHeadSchema);
  const nonEmpty = list.min(1, {
    error: 'needs at least one entry: without a fixed head (or a head-dependent boundary or leakage) the head is undetermined',
  });
  return dispatch<FixedHeadEntry[]>('a list of fixed-head entries', (value) =>
    Array.isArray(value) && OTHER_ANCHORS in value ? list : nonEmpty,
  );
}

/** Uncertainty ensembles (`piezomap ensemble`): realisations of ln K multiplying the conductivity raster. Baseline only. */
export const ensembleSchema = strict({
  realisations: z.int().gt(0).lte(1_000_000),
  seed: z.int().gte(0).lte(4294967295),
  logConductivity: strict({
    sd: finite.gte(0).lte(10),
    correlationLength: z.union([finite.gt(0), z.tuple([finite.gt(0), finite.gt(0)])]),
    model: z.enum(['exponential', 'gaussian']).default('exponential'),
  }),
  conditioning: filePath.optional(),
  drawdownThresholds: z.array(finite.gt(0)).default([]),
  percentiles: z.array(finite.gt(0).lt(100)).default([5, 50, 95]),
  /** With `tracking`: count each well's capture zones over the realisations (false skips the tracking). */
  captureProbability: z.boolean().default(true),
});

/** Keys a variant may replace: every top-level key except `variants`. */
const replaceableFields = {
  title: z.string().optional(),
  units: unitsSchema.optional(),
  aquifer: aquiferSchema.optional(),
  fixedHeads: fixedHeadList().optional(),
  recharge: numberOrPath(finite, 'a recharge rate (length/time) or the path of a GeoTIFF').optional(),
  headDependent: z.array(headDependentSchema).optional(),
  leakage: leakageSchema.optional(),
  wells: listOrCsv(wellSchema, 'well').optional(),
  pointCrs: pointCrsSchema.optional(),
  /** Elevation of the ground surface, for the sanity warnings (heads above it are flowing artesian). Optional. */
  groundSurface: numberOrPath(finite, 'an elevation (length) or the path of a GeoTIFF').optional(),
  observations: listOrCsv(observationSchema, 'observation').optional(),
  receptors: listOrCsv(receptorSchema, 'receptor').optional(),
  solver: solverSchema.optional(),
  tracking: trackingSchema.optional(),
};

export const variantSchema = z.preprocess(
  markOtherAnchors,
  strict({
    name: z
      .string()
      .regex(/^[A-Za-z0-9_-]+$/, { error: 'must use only letters, digits, "-" and "_" (it names a result folder)' })
      .refine((name) => name.toLowerCase() !== 'baseline', { error: '"baseline" is reserved for the scenario itself' }),
    ...replaceableFields,
    wells: listOrCsv(wellChangeSchema, 'well').optional(),
  }),
);

export const scenarioSchema = z.preprocess(
  markOtherAnchors,
  strict({
    ...replaceableFields,
    aquifer: aquiferSchema,
    fixedHeads: fixedHeadList(),
    ensemble: ensembleSchema.optional(),
    variants: z
      .array(variantSchema)
      .superRefine((variants, ctx) => {
        const seen = new Map<string, number>();
        variants.forEach((variant, index) => {
          // Folder names: compare without case so that "Wet" and "wet" cannot overwrite each other on any file system.
          const key = variant.name.toLowerCase();
          const first = seen.get(key);
          if (first !== undefined) {
            ctx.addIssue({
              code: 'custom',
              path: [index, 'name'],
              message: `duplicate variant name "${variant.name}" (also variants[${first}])`,
            });
          } else {
            seen.set(key, index);
          }
        });
      })
      .optional(),
  }),
);

export type Units = z.output<typeof unitsSchema>;
export type AquiferJson = z.output<typeof aquiferSchema>;
export type FixedHeadRasterEntry = z.output<typeof fixedHeadRasterSchema>;
export type FixedHeadEdgeEntry = z.output<typeof fixedHeadEdgeSchema>;
export type FixedHeadShapeEntry = z.output<typeof fixedHeadShapeSchema>;
export type FixedHeadEntry = FixedHeadRasterEntry | FixedHeadEdgeEntry | FixedHeadShapeEntry;
export type WellEntry = z.output<typeof wellSchema>;
export type HeadDependentEntry = z.output<typeof headDependentSchema>;
export type LeakageEntry = z.output<typeof leakageSchema>;
export type WellChange = z.output<typeof wellChangeSchema>;
export type ObservationEntry = z.output<typeof observationSchema>;
export type ReceptorEntry = z.output<typeof receptorSchema>;
export type SolverJson = z.output<typeof solverSchema>;
export type TrackingJson = z.output<typeof trackingSchema>;
export type VariantJson = z.output<typeof variantSchema>;
export type EnsembleJson = z.output<typeof ensembleSchema>;
type ParsedScenario = z.output<typeof scenarioSchema>;

/**
 * Wells after a variant was merged in: the layers apply in order, merging by id (see mergeVariant in load.ts).
 * It is not part of the file format: only mergeVariant makes it, so that a CSV well list can be merged when read.
 */
export interface WellLayers {
  layers: WellLayer[];
}

export interface WellLayer {
  /** For messages: e.g. `wells` or `variants "expanded".wells`. */
  source: string;
  wells: WellChange[] | string;
}

/** The validated scenario JSON (nested defaults applied). `wells` is a WellLayers only after mergeVariant. */
export type ScenarioJson = Omit<ParsedScenario, 'wells'> & { wells?: WellEntry[] | string | WellLayers };

export type ParseResult = { ok: true; scenario: ScenarioJson } | { ok: false; message: string; issueCount: number };

/**
 * Validate parsed JSON. On failure, `message` lists every problem as `LABEL: key.path: what is wrong`
 * (at most `maxLines` lines, then a count of the rest).
 */
export function parseScenarioJson(json: unknown, label: string, maxLines = 8): ParseResult {
  const result = scenarioSchema.safeParse(json);
  if (result.success) return { ok: true, scenario: result.data };
  const { text, count } = describeIssues(result.error.issues, json, label, maxLines);
  return { ok: false, message: text, issueCount: count };
}

/** `KEY: unknown key (did you mean "X"?)`, or the list of keys allowed here when no key is close. */
export function unknownKeyText(key: string, known: readonly string[]): string {
  const best = closest(key, known);
  if (best !== null) return `unknown key (did you mean "${best}"?)`;
  return `unknown key (allowed here: ${known.join(', ')})`;
}

/** The known word nearest to `word` in edit distance, when near enough to be a likely typo. */
export function closest(word: string, known: readonly string[]): string | null {
  const lower = word.toLowerCase();
  let best: string | null = null;
  let bestDistance = Infinity;
  for (const candidate of known) {
    const distance = editDistance(lower, candidate.toLowerCase());
    if (distance < bestDistance) {
      best = candidate;
      bestDistance = distance;
    }
  }
  // Allow about one typo per three letters; "x" for "y" would be a guess, not a suggestion.
  const limit = Math.max(1, Math.floor(Math.max(word.length, 3) / 3));
  return bestDistance <= limit ? best : null;
}

/** Optimal string alignment distance (Levenshtein plus adjacent transpositions; Damerau 1964). */
function editDistance(a: string, b: string): number {
  const rows = a.length + 1;
  const cols = b.length + 1;
  const d = new Int32Array(rows * cols);
  for (let i = 0; i < rows; i++) d[i * cols] = i;
  for (let j = 0; j < cols; j++) d[j] = j;
  for (let i = 1; i < rows; i++) {
    for (let j = 1; j < cols; j++) {
      const cost = a.charCodeAt(i - 1) === b.charCodeAt(j - 1) ? 0 : 1;
      let value = Math.min(d[(i - 1) * cols + j]! + 1, d[i * cols + j - 1]! + 1, d[(i - 1) * cols + j - 1]! + cost);
      if (i > 1 && j > 1 && a.charCodeAt(i - 1) === b.charCodeAt(j - 2) && a.charCodeAt(i - 2) === b.charCodeAt(j - 1)) {
        value = Math.min(value, d[(i - 2) * cols + j - 2]! + 1);
      }
      d[i * cols + j] = value;
    }
  }
  return d[rows * cols - 1]!;
}
