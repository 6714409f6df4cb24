/**
 * One failure type for the whole library. The CLI maps `code` to an exit status:
 * input/usage -> 2, solver -> 3, internal -> 1 (see ../shared/spec/interface.md).
 */
export type ErrorCode = 'input' | 'usage' | 'solver' | 'internal' | 'interrupted';

export interface ErrorDetail {
  /** File at fault, as the user named it (or resolved path). */
  file?: string;
  /** Key path inside the scenario file, e.g. `wells[2].rate`. */
  key?: string;
  /** Cell at fault, `row`/`col` in the raster grid. */
  cell?: { row: number; col: number };
  /** What the user can do about it. */
  hint?: string;
}

export class PiezomapError extends Error {
  readonly code: ErrorCode;
  readonly detail: ErrorDetail;

  constructor(code: ErrorCode, message: string, detail: ErrorDetail = {}) {
    super(message);
    this.name = 'PiezomapError';
    this.code = code;
    this.detail = detail;
  }

  /** Message as shown to users: the message, then the hint on its own line. */
  describe(): string {
    return this.detail.hint ? `${this.message}\n  hint: ${this.detail.hint}` : this.message;
  }
}

export function inputError(message: string, detail: ErrorDetail = {}): PiezomapError {
  return new PiezomapError('input', message, detail);
}

export function exitCodeFor(error: unknown): number {
  if (error instanceof PiezomapError) {
    switch (error.code) {
      case 'input':
      case 'usage':
        return 2;
      case 'solver':
        return 3;
      case 'interrupted':
        return 130;
      default:
        return 1;
    }
  }
  return 1;
}

/** Some libraries throw plain strings or other non-Error values; make a readable text of any of them. */
export function describeThrown(thrown: unknown): string {
  if (thrown instanceof Error) return thrown.message;
  if (typeof thrown === 'string') return thrown;
  try {
    return JSON.stringify(thrown);
  } catch {
    return String(thrown);
  }
}
