#!/usr/bin/env node
// The command is the compiled CLI in dist/. `npm ci`, `npm install` and installs from git or a folder build it
// through the package's `prepare` script; if it is missing anyway, say so in one line instead of a stack trace.
import { existsSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';

const cliUrl = new URL('../dist/src/cli/main.js', import.meta.url);
if (!existsSync(fileURLToPath(cliUrl))) {
  const root = dirname(dirname(fileURLToPath(import.meta.url)));
  const fix = existsSync(join(root, 'src'))
    ? `run "npm ci" or "npm run build" in ${root}`
    : 'reinstall piezomap (its prepare script builds it)';
  process.stderr.write(`piezomap: not built (${fileURLToPath(cliUrl)} is missing); ${fix}\n`);
  process.exit(1);
}
const { main, installSignalHandlers } = await import(cliUrl.href);

installSignalHandlers();
const code = await main(process.argv.slice(2));
process.exitCode = code;
