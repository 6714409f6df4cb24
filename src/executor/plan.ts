/**
 * A solve plan: the steps of a run that need a solver, written once as a generator that yields its requests
 * (open a session, solve, change the diagonal, close) and receives the answers. `runInline` answers them in the
 * calling thread, synchronously; `runOn` answers them with any executor (e.g. the worker thread), asynchronously.
 * So the normal solve, the worker solve, compare and later outer iterations are one code path.
 */
import { inlineExecutor, type InlineSession } from './inline.js';
import type { Executor, LinearAnswer, LinearSolve, OperatorBands, SolverChoice, SolverSession } from './types.js';
import type { StencilOperator } from '../solvers/types.js';

/** A session as a plan sees it: opaque, with what the plan may read. */
export interface SessionHandle {
  readonly method: string;
  readonly setupSeconds: number;
}

export type PlanStep =
  | { kind: 'open'; operator: StencilOperator; choice: SolverChoice }
  | { kind: 'solve'; session: SessionHandle; request: LinearSolve }
  | { kind: 'diagonal'; session: SessionHandle; diag: Float64Array }
  | { kind: 'operator'; session: SessionHandle; bands: OperatorBands; rebuild: boolean }
  | { kind: 'close'; session: SessionHandle };

export type Plan<T> = Generator<PlanStep, T, unknown>;

export function* openSession(operator: StencilOperator, choice: SolverChoice): Plan<SessionHandle> {
  return (yield { kind: 'open', operator, choice }) as SessionHandle;
}

export function* solveLinear(session: SessionHandle, request: LinearSolve): Plan<LinearAnswer> {
  return (yield { kind: 'solve', session, request }) as LinearAnswer;
}

export function* setDiagonal(session: SessionHandle, diag: Float64Array): Plan<void> {
  yield { kind: 'diagonal', session, diag };
}

/** Replace the session's operator bands (see SolverSession.setOperator). */
export function* setOperator(session: SessionHandle, bands: OperatorBands, rebuild: boolean): Plan<void> {
  yield { kind: 'operator', session, bands, rebuild };
}

export function* closeSession(session: SessionHandle): Plan<void> {
  yield { kind: 'close', session };
}

/** Run a plan in the calling thread. Sessions left open (an error part-way) are closed. */
export function runInline<T>(plan: Plan<T>): T {
  const open = new Set<InlineSession>();
  try {
    let step = plan.next();
    while (!step.done) {
      const s = step.value;
      let answer: unknown;
      if (s.kind === 'open') {
        const session = inlineExecutor.openNow(s.operator, s.choice);
        open.add(session);
        answer = session;
      } else if (s.kind === 'solve') answer = (s.session as InlineSession).solveNow(s.request);
      else if (s.kind === 'diagonal') (s.session as InlineSession).setDiagonalNow(s.diag);
      else if (s.kind === 'operator') (s.session as InlineSession).setOperatorNow(s.bands, s.rebuild);
      else {
        (s.session as InlineSession).close();
        open.delete(s.session as InlineSession);
      }
      step = plan.next(answer);
    }
    return step.value;
  } finally {
    for (const session of open) session.close();
  }
}

/** Run a plan with an executor. Sessions left open (an error part-way) are closed. */
export async function runOn<T>(plan: Plan<T>, executor: Executor): Promise<T> {
  const open = new Set<SolverSession>();
  try {
    let step = plan.next();
    while (!step.done) {
      const s = step.value;
      let answer: unknown;
      if (s.kind === 'open') {
        const session = await executor.open(s.operator, s.choice);
        open.add(session);
        answer = session;
      } else if (s.kind === 'solve') answer = await (s.session as SolverSession).solve(s.request);
      else if (s.kind === 'diagonal') await (s.session as SolverSession).setDiagonal(s.diag);
      else if (s.kind === 'operator') await (s.session as SolverSession).setOperator(s.bands, s.rebuild);
      else {
        (s.session as SolverSession).close();
        open.delete(s.session as SolverSession);
      }
      step = plan.next(answer);
    }
    return step.value;
  } finally {
    for (const session of open) session.close();
  }
}
