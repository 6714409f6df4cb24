import type { ProgressEvent } from '../pipeline.js';

/**
 * Progress on stderr, only when stderr is a terminal and the user did not ask for quiet.
 * On a pipe or in a file nothing is written, so logs and captured output stay clean.
 */
export function makeProgress(quiet: boolean, stream: NodeJS.WriteStream = process.stderr): ((e: ProgressEvent) => void) | undefined {
  if (quiet || !stream.isTTY) return undefined;
  let lastDraw = 0;
  let open = false;
  const draw = (text: string, force = false) => {
    const t = Date.now();
    if (!force && t - lastDraw < 100) return;
    lastDraw = t;
    stream.write(`\r\x1b[2K${text}`);
    open = true;
  };
  return (e) => {
    if (e.stage === 'solve') {
      // Progress towards the tolerance on a log scale: residual 1 -> 0 %, tolerance -> 100 %.
      const target = Math.log10(e.tolerance);
      const done = Math.min(1, Math.max(0, Math.log10(Math.max(e.relativeResidual, 1e-300)) / target));
      const width = 24;
      const filled = Math.round(done * width);
      draw(
        `solving  [${'#'.repeat(filled)}${'.'.repeat(width - filled)}] iteration ${e.iteration}, residual ${e.relativeResidual.toExponential(2)}`,
      );
    } else {
      draw(`${e.stage.padEnd(8)} ${e.message}`, true);
    }
    if (e.stage === 'write' && open) {
      stream.write('\n');
      open = false;
    }
  };
}

export function clearProgress(stream: NodeJS.WriteStream = process.stderr): void {
  if (stream.isTTY) stream.write('\r\x1b[2K');
}
