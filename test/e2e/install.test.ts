/**
 * piezomap installs as people install packages: `npm pack` of a copy of the sources (its `prepare` script builds
 * dist/ there, as it does for an install from git or a folder), then `npm install --offline` of the tarball into a
 * separate project, where `npx piezomap --help` and the README's library example ("From a script") must run.
 *
 * Offline: `npm ci` fills the npm cache with the dependencies' tarballs but not with the registry's package
 * documents that `npm install` needs to choose versions, so the separate project gets a lockfile pinning the
 * versions and integrity hashes of piezomap's own package-lock.json (what its own lockfile would record), and npm
 * then installs from the cache alone. One test file, run once per suite; about 20-30 s, most of it the build.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { spawnSync } from 'node:child_process';
import { cpSync, existsSync, mkdirSync, mkdtempSync, readFileSync, rmSync, symlinkSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, relative, resolve } from 'node:path';

const root = resolve(__dirname, '../..');
const work = mkdtempSync(join(tmpdir(), 'piezomap-install-'));
const source = join(work, 'source');
const consumer = join(work, 'consumer');
const TSC = join(root, 'node_modules', 'typescript', 'bin', 'tsc');

interface LockEntry {
  dev?: boolean;
  devOptional?: boolean;
  optional?: boolean;
  [key: string]: unknown;
}

/** The environment of a plain shell: without the npm_* variables of the `npm test` run that may be running us. */
function plainEnv(): NodeJS.ProcessEnv {
  const env: NodeJS.ProcessEnv = { FORCE_COLOR: '0' };
  for (const [key, value] of Object.entries(process.env)) {
    if (!key.startsWith('npm_') || key === 'npm_config_cache' || key === 'npm_config_userconfig') env[key] = value;
  }
  return env;
}

function run(command: string, args: string[], cwd: string) {
  const r = spawnSync(command, args, { cwd, encoding: 'utf8', env: plainEnv(), timeout: 120_000 });
  const output = `${command} ${args.join(' ')} (in ${cwd}) exited ${r.status}\n${r.stdout}\n${r.stderr}`;
  return { code: r.status, stdout: r.stdout, stderr: r.stderr, output };
}

/** The README's "From a script" code block, as printed there. */
function readmeExample(): string {
  const readme = readFileSync(join(root, 'README.md'), 'utf8');
  const match = /```ts\n([\s\S]*?)```/.exec(readme.slice(readme.indexOf('## From a script')));
  if (!match) throw new Error('README.md has no ```ts block under "## From a script"');
  return match[1]!;
}

afterAll(() => rmSync(work, { recursive: true, force: true }));

describe('the packed package installed into another project', () => {
  let tarball = '';

  beforeAll(() => {
    // The sources as a fresh clone has them (no dist/, no results), with this checkout's installed dependencies, so
    // that the build of `npm pack` neither needs the network nor rewrites the dist/ other tests are running from.
    cpSync(root, source, {
      recursive: true,
      filter: (path) => !/^(node_modules|dist|test|\.git|piezomap-demo|bench-results)(\/|$)/.test(relative(root, path)),
    });
    symlinkSync(join(root, 'node_modules'), join(source, 'node_modules'), 'dir');
    const pack = run('npm', ['pack', '--json', '--pack-destination', work], source);
    expect(pack.code, pack.output).toBe(0);
    const [packed] = JSON.parse(pack.stdout.slice(pack.stdout.indexOf('['))) as { filename: string }[];
    tarball = join(work, packed!.filename);

    const pkg = JSON.parse(readFileSync(join(root, 'package.json'), 'utf8')) as Record<string, unknown> & { version: string };
    const lock = JSON.parse(readFileSync(join(root, 'package-lock.json'), 'utf8')) as { packages: Record<string, LockEntry> };
    const spec = `file:${relative(consumer, tarball)}`;
    const packages: Record<string, LockEntry> = {
      '': { name: 'consumer', version: '1.0.0', dependencies: { piezomap: spec } },
      'node_modules/piezomap': {
        version: pkg.version,
        resolved: spec,
        license: pkg.license,
        dependencies: pkg.dependencies,
        bin: pkg.bin,
        engines: pkg.engines,
      },
    };
    for (const [path, entry] of Object.entries(lock.packages)) {
      if (path === '' || entry.dev) continue; // the project itself and what only its development needs
      const { devOptional, ...kept } = entry;
      packages[path] = devOptional ? { ...kept, optional: true } : kept;
    }
    mkdirSync(consumer);
    const manifest = { name: 'consumer', version: '1.0.0', private: true, type: 'module', dependencies: { piezomap: spec } };
    writeFileSync(join(consumer, 'package.json'), JSON.stringify(manifest, null, 2));
    writeFileSync(
      join(consumer, 'package-lock.json'),
      JSON.stringify({ name: 'consumer', version: '1.0.0', lockfileVersion: 3, requires: true, packages }, null, 2),
    );
    const install = run('npm', ['install', '--offline', '--no-audit', '--no-fund'], consumer);
    expect(install.code, install.output).toBe(0);
  }, 150_000);

  it('ships the built library, the command, its types and the demo data, and not the sources or tests', () => {
    const installed = join(consumer, 'node_modules', 'piezomap');
    for (const file of [
      'bin/piezomap.js',
      'dist/src/index.js',
      'dist/src/index.d.ts',
      'dist/src/executor/solveWorker.js',
      'data/valley.json',
    ]) {
      expect(existsSync(join(installed, file)), file).toBe(true);
    }
    for (const folder of ['src', 'test', 'dist/bench', 'dist/scripts', 'node_modules/typescript'])
      expect(existsSync(join(installed, folder)), folder).toBe(false);
  });

  it('runs `npx piezomap --help` and `--version`', () => {
    const help = run('npx', ['--no-install', 'piezomap', '--help'], consumer);
    expect(help.code, help.output).toBe(0);
    expect(help.stdout).toMatch(/^Usage: piezomap /);
    for (const command of ['solve', 'compare', 'inspect', 'demo']) expect(help.stdout).toContain(command);
    const version = run('npx', ['--no-install', 'piezomap', '--version'], consumer);
    expect(version.stdout.trim()).toBe(JSON.parse(readFileSync(join(root, 'package.json'), 'utf8')).version);
  });

  it("type-checks and runs the README's library example against the installed package", () => {
    writeFileSync(join(consumer, 'example.ts'), readmeExample());
    // Compiled with the project's TypeScript against the installed package's own declarations (its "types").
    const tsc = run(
      process.execPath,
      [
        TSC,
        '--strict',
        '--target',
        'es2022',
        '--module',
        'nodenext',
        '--moduleResolution',
        'nodenext',
        '--skipLibCheck',
        '--typeRoots',
        join(root, 'node_modules', '@types'),
        '--types',
        'node',
        'example.ts',
      ],
      consumer,
    );
    expect(tsc.code, tsc.output).toBe(0);
    const example = run(process.execPath, ['example.js'], consumer);
    expect(example.code, example.output).toBe(0);
    const lines = example.stdout.trim().split('\n');
    expect(lines[0]).toMatch(/^baseline: \d+ iterations, discrepancy -?\d\.\de[-+]\d+ %$/);
    expect(lines).toHaveLength(4);
    const drawdowns = lines.slice(1).map((l) => Number(/max drawdown (\d+\.\d+) m/.exec(l)?.[1]));
    // Linearity of the confined system (common practice: superposition): drawdown scales with the added rate.
    expect(drawdowns[0]).toBeGreaterThan(0);
    expect(drawdowns[1]! / drawdowns[0]!).toBeCloseTo(2, 1);
    expect(drawdowns[2]! / drawdowns[0]!).toBeCloseTo(3, 1);
  });
});

it('bin/piezomap.js says in one line, without a stack trace, when dist/ has not been built', () => {
  const bare = join(work, 'unbuilt');
  mkdirSync(join(bare, 'bin'), { recursive: true });
  writeFileSync(join(bare, 'package.json'), JSON.stringify({ name: 'piezomap', type: 'module' }));
  cpSync(join(root, 'bin', 'piezomap.js'), join(bare, 'bin', 'piezomap.js'));
  const notBuilt = /^piezomap: not built \(.*dist\/src\/cli\/main\.js is missing\); /;
  // An installed copy (no sources beside it): reinstalling is the way out.
  const installed = run(process.execPath, [join(bare, 'bin', 'piezomap.js'), '--help'], bare);
  expect(installed.code).toBe(1);
  expect(installed.stdout).toBe('');
  expect(installed.stderr.trim().split('\n')).toHaveLength(1);
  expect(installed.stderr).toMatch(notBuilt);
  expect(installed.stderr).toContain('reinstall piezomap');
  // A clone (sources beside it): building it is.
  mkdirSync(join(bare, 'src'));
  const clone = run(process.execPath, [join(bare, 'bin', 'piezomap.js'), '--help'], bare);
  expect(clone.code).toBe(1);
  expect(clone.stderr.trim().split('\n')).toHaveLength(1);
  expect(clone.stderr).toMatch(notBuilt);
  expect(clone.stderr).toContain(`"npm run build" in ${bare}`);
  expect(clone.stderr + installed.stderr).not.toMatch(/\n\s+at /);
});
