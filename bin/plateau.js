#!/usr/bin/env node
// Entry point: the compiled command line (npm ci builds dist/ through the prepare script).
import { main } from '../dist/cli/main.js';

process.exitCode = await main(process.argv.slice(2));
