#!/usr/bin/env node
import { main, installSignalHandlers } from '../dist/src/cli/main.js';

installSignalHandlers();
const code = await main(process.argv.slice(2));
process.exitCode = code;
