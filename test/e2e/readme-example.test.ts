/**
 * The README's library example runs as written (only the package specifier 'piezomap' is pointed at the source),
 * on the bundled demo, and prints what it promises.
 */
import { afterAll, expect, it, vi } from 'vitest';
import { mkdirSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { join, resolve } from 'node:path';

const root = resolve(__dirname, '../..');
const scratch = join(root, 'test', 'tmp', 'readme-example');

afterAll(() => rmSync(scratch, { recursive: true, force: true }));

it('runs the README "From a script" example on the demo', async () => {
  const readme = readFileSync(join(root, 'README.md'), 'utf8');
  const section = readme.slice(readme.indexOf('## From a script'));
  const match = /```ts\n([\s\S]*?)```/.exec(section);
  expect(match, 'README has a ```ts block under "From a script"').not.toBeNull();
  const code = match![1]!.replace(/from 'piezomap'/g, `from '${join(root, 'src', 'index.js').replace(/\\/g, '/')}'`);
  mkdirSync(scratch, { recursive: true });
  const file = join(scratch, 'example.ts');
  writeFileSync(file, code);

  const lines: string[] = [];
  const spy = vi.spyOn(console, 'log').mockImplementation((...args: unknown[]) => void lines.push(args.join(' ')));
  try {
    await import(file);
  } finally {
    spy.mockRestore();
  }
  expect(lines[0]).toMatch(/^baseline: \d+ iterations, discrepancy -?\d\.\de[-+]\d+ %$/);
  expect(lines.slice(1)).toHaveLength(3);
  const drawdowns = lines.slice(1).map((l) => Number(/max drawdown (\d+\.\d+) m/.exec(l)?.[1]));
  // More pumping, more drawdown (linearity of the confined system: drawdown scales with the added rate).
  expect(drawdowns[0]).toBeGreaterThan(0);
  expect(drawdowns[1]! / drawdowns[0]!).toBeCloseTo(2, 1);
  expect(drawdowns[2]! / drawdowns[0]!).toBeCloseTo(3, 1);
  for (const l of lines.slice(1)) expect(l).toMatch(/% from the river$/);
}, 120_000);
