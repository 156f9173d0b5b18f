/**
 * The broker thread: owns the estimator commands' processes and talks to them asynchronously, so that the
 * calling thread, whose `estimate` must return a number synchronously, can block on a shared flag until the
 * answer (or a time-out, an exit, a garbled line) is known. One broker per calling thread; one process per
 * command id, started on first use and kept alive; any failure other than the command's own {"error"} reply
 * stops the process, and the next estimate starts a fresh one.
 */
import { spawn, type ChildProcess } from 'node:child_process';
import { workerData, type MessagePort } from 'node:worker_threads';
import { PROTOCOL_VERSION, type BrokerAsk, type BrokerReply } from './protocol.js';
import type { CommandDeclaration } from './declaration.js';
import { killCommandProcess } from './kill.js';

/**
 * ownGroup: start each command in a process group of its own, so that stopping it stops what it started too (a
 * launcher's child). Only under a supervisor (a worker thread's broker), which stops the groups itself: from the
 * main thread a command stays in hhat's group, where a terminal's Ctrl-C reaches it as it reaches hhat.
 */
const { port, flag, pids, ownGroup } = workerData as { port: MessagePort; flag: SharedArrayBuffer; pids: Int32Array; ownGroup: boolean };
const signal = new Int32Array(flag);

/** Marks a started process in the shared pid slots (client.ts), where whoever stops the calling thread finds it. */
function recordPid(pid: number): void {
  for (let i = 0; i < pids.length; i++) if (Atomics.compareExchange(pids, i, 0, pid) === 0) return;
}

function forgetPid(pid: number): void {
  for (let i = 0; i < pids.length; i++) if (Atomics.compareExchange(pids, i, pid, 0) === pid) return;
}

/** stderr kept per process, for failure reasons. */
const STDERR_KEEP = 4096;

interface Running {
  child: ChildProcess;
  lines: string[];
  partial: string;
  stderr: string;
  /** Why the process is gone ("exited with code 1"), or null while it runs. */
  ended: string | null;
  wake: (() => void) | null;
  nextRequest: number;
}

const running = new Map<string, Running>();

function answer(reply: BrokerReply): void {
  port.postMessage(reply);
  Atomics.store(signal, 0, 1);
  Atomics.notify(signal, 0);
}

function quoteCommand(declaration: CommandDeclaration): string {
  return declaration.command.map((w) => (/^[\w./=:,@+-]+$/.test(w) ? w : JSON.stringify(w))).join(' ');
}

/** The last few lines the process wrote on stderr, as " (stderr: ...)", or ''. */
function stderrTail(proc: Running): string {
  const lines = proc.stderr
    .split('\n')
    .map((l) => l.trim())
    .filter(Boolean)
    .slice(-3);
  if (!lines.length) return '';
  const text = lines.join(' | ');
  return ` (stderr: ${text.length > 400 ? `…${text.slice(-400)}` : text})`;
}

function start(declaration: CommandDeclaration): Running {
  const [program, ...args] = declaration.command;
  const child = spawn(program, args, { cwd: declaration.cwd, stdio: ['pipe', 'pipe', 'pipe'], windowsHide: true, detached: ownGroup });
  const proc: Running = { child, lines: [], partial: '', stderr: '', ended: null, wake: null, nextRequest: 1 };
  if (child.pid !== undefined) recordPid(child.pid);
  const wake = () => {
    const w = proc.wake;
    proc.wake = null;
    w?.();
  };
  child.stdout.setEncoding('utf8');
  child.stderr.setEncoding('utf8');
  child.stdout.on('data', (chunk: string) => {
    const parts = (proc.partial + chunk).split('\n');
    proc.partial = parts.pop()!;
    for (const line of parts) if (line.trim()) proc.lines.push(line.trim());
    if (proc.lines.length) wake();
  });
  child.stderr.on('data', (chunk: string) => {
    proc.stderr = (proc.stderr + chunk).slice(-STDERR_KEEP);
  });
  // Writing to a proc that has died raises EPIPE on its stdin; the exit below is the reason that counts.
  child.stdin.on('error', () => undefined);
  child.on('error', (error: NodeJS.ErrnoException) => {
    const hint = error.code === 'ENOENT' ? ' (no such program, or its working folder is gone)' : error.code === 'EACCES' ? ' (not executable)' : '';
    proc.ended ??= `could not be started: ${error.message}${hint}; the command is \`${quoteCommand(declaration)}\` in ${declaration.cwd}`;
    wake();
  });
  child.on('exit', (code, killedBy) => {
    if (child.pid !== undefined) forgetPid(child.pid);
    proc.ended ??= killedBy ? `was stopped by signal ${killedBy}` : `exited with code ${code}`;
    wake();
  });
  return proc;
}

function stop(id: string, proc: Running): void {
  if (running.get(id) === proc) running.delete(id);
  if (proc.ended === null) proc.ended = 'was stopped';
  if (proc.child.pid !== undefined) killCommandProcess(proc.child.pid);
}

/** The next line the process prints, or null when it ended or `timeoutMs` passed (then `timedOut` is true). */
async function nextLine(proc: Running, timeoutMs: number): Promise<{ line: string | null; timedOut: boolean }> {
  const deadline = Date.now() + timeoutMs;
  for (;;) {
    if (proc.lines.length) return { line: proc.lines.shift()!, timedOut: false };
    if (proc.ended !== null) {
      // Give the stdout pipe a moment to deliver what was written just before the exit.
      await new Promise((resolve) => setTimeout(resolve, 5));
      return proc.lines.length ? { line: proc.lines.shift()!, timedOut: false } : { line: null, timedOut: false };
    }
    const left = deadline - Date.now();
    if (left <= 0) return { line: null, timedOut: true };
    await new Promise<void>((resolve) => {
      const timer = setTimeout(resolve, left);
      proc.wake = () => {
        clearTimeout(timer);
        resolve();
      };
    });
  }
}

function send(proc: Running, message: object): void {
  if (proc.ended === null) proc.child.stdin!.write(`${JSON.stringify(message)}\n`);
}

function parse(line: string): Record<string, unknown> | null {
  try {
    const value: unknown = JSON.parse(line);
    return value !== null && typeof value === 'object' && !Array.isArray(value) ? (value as Record<string, unknown>) : null;
  } catch {
    return null;
  }
}

function shown(line: string): string {
  return JSON.stringify(line.length > 120 ? `${line.slice(0, 120)}…` : line);
}

class Failure extends Error {}

/** Starts the command and exchanges the hello; throws a Failure with the reason when it cannot. */
async function started(ask: BrokerAsk): Promise<Running> {
  const { declaration } = ask;
  const proc = start(declaration);
  running.set(declaration.id, proc);
  const defaults = Object.fromEntries(declaration.settings.map((s) => [s.name, s.default]));
  send(proc, { hhat: PROTOCOL_VERSION, estimator: declaration.id, quantity: declaration.quantity, settings: defaults });
  const { line, timedOut } = await nextLine(proc, ask.timeoutMs);
  const fail = (why: string): never => {
    const tail = stderrTail(proc);
    stop(declaration.id, proc);
    throw new Failure(`${declaration.id} ${why}${tail}`);
  };
  if (timedOut) fail(`did not answer hhat's hello within ${ask.limitText}`);
  if (line === null) fail(proc.ended!.startsWith('could not be started') ? proc.ended! : `${proc.ended} before answering hhat's hello`);
  const reply = parse(line!);
  if (!reply) fail(`answered hhat's hello with a line that is not a JSON object: ${shown(line!)}`);
  if (typeof reply!.error === 'string') fail(`refused to start: ${reply!.error}`);
  if (reply!.ready !== true) fail(`answered hhat's hello with ${shown(line!)}, not {"ready": true}`);
  return proc;
}

async function estimate(ask: BrokerAsk): Promise<BrokerReply> {
  const { declaration } = ask;
  let proc = running.get(declaration.id);
  if (!proc || proc.ended !== null) proc = await started(ask);
  const number = proc.nextRequest++;
  proc.stderr = '';
  send(proc, { request: number, ...ask.request });
  const { line, timedOut } = await nextLine(proc, ask.timeoutMs);
  const failed = (why: string): BrokerReply => {
    const tail = stderrTail(proc);
    stop(declaration.id, proc);
    return { ok: false, reason: `${declaration.id} ${why}${tail}; it was stopped and restarts for the next estimate` };
  };
  if (timedOut) return failed(`timed out after ${ask.limitText} on request ${number}`);
  if (line === null) return failed(`${proc.ended} before answering request ${number}`);
  const reply = parse(line);
  if (!reply) return failed(`answered request ${number} with a line that is not a JSON object: ${shown(line)} (print diagnostics to stderr, not stdout)`);
  if (reply.request !== number) return failed(`answered request ${JSON.stringify(reply.request ?? null)} while request ${number} was asked`);
  if (typeof reply.error === 'string') return { ok: false, reason: `${declaration.id} reported: ${reply.error}`, reported: true };
  if (typeof reply.value !== 'number' || !Number.isFinite(reply.value)) {
    // JSON.parse reads 1e400 as Infinity, which JSON.stringify would print as null.
    const shownValue = typeof reply.value === 'number' ? String(reply.value) : JSON.stringify(reply.value ?? null);
    return failed(`answered request ${number} with value ${shownValue}, not a finite number`);
  }
  return { ok: true, value: reply.value };
}

port.on('message', (ask: BrokerAsk | { close: true }) => {
  if ('close' in ask) {
    for (const [id, proc] of running) {
      proc.child.stdin!.end();
      stop(id, proc);
    }
    answer({ ok: true, value: 0 });
    return;
  }
  estimate(ask).then(answer, (error: unknown) =>
    answer({
      ok: false,
      reason: error instanceof Failure ? `${error.message}; hhat starts it again for the next estimate` : `the broker failed: ${String(error)}`,
    }),
  );
});
