/**
 * Estimator commands as estimators: each declaration becomes an Estimator whose synchronous `estimate` writes
 * the sample as .npy to this thread's private temporary folder, hands the request to the broker thread
 * (./broker.ts) and blocks on a shared flag until the broker has the command's answer. So a command runs
 * wherever an estimator runs (bench workers, in-process runs, `estimate`, `check`, `advise`) with nothing
 * asynchronous leaking into the harness.
 *
 *   useEstimatorCommands(plan.commands, plan.limits);   // in each thread, before the plan resolves
 */
import { closeSync, mkdtempSync, openSync, rmSync, writeSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { isMainThread, MessageChannel, receiveMessageOnPort, Worker, type MessagePort } from 'node:worker_threads';
import type { Estimator, Sample, Settings } from '../../core/contracts.js';
import { CommandError } from '../../core/errors.js';
import { float64Bytes, npyFloat64Header } from '../../data/npy-write.js';
import { replaceEstimator } from '../../../estimators/index.js';
import { DEFAULT_LIMITS, estimateTimeLimit, timeLimitText, type Limits } from '../plan.js';
import type { CommandDeclaration } from './declaration.js';
import type { BrokerAsk, BrokerReply, EstimateRequest } from './protocol.js';
import { COMMAND_PID_SLOTS } from './protocol.js';
import { killCommandProcess } from './kill.js';

interface Bridge {
  broker: Worker;
  port: MessagePort;
  signal: Int32Array;
}

let bridge: Bridge | null = null;
let folder: string | null = null;
let limits: Limits = DEFAULT_LIMITS;
/**
 * The pids of the command processes running for this thread, written by its broker the moment each starts (this
 * thread is then blocked in an estimate that may never return): killed when the process exits, and, in a worker,
 * shared with the supervisor, which stops them when it stops the worker.
 */
let commandPids: Int32Array = new Int32Array(new SharedArrayBuffer(4 * COMMAND_PID_SLOTS));
const folderListeners: ((folder: string) => void)[] = [];

/** Makes the broker keep its pids in `slots` (a worker's shared marker), before any command starts. */
export function shareCommandPids(slots: Int32Array): void {
  commandPids = slots;
}

/** Called with the temporary folder this thread's commands read their samples from, when it is made. */
export function onCommandFolder(listener: (folder: string) => void): void {
  folderListeners.push(listener);
}

function brokerEntry(): URL {
  // From the TypeScript sources (tests, tsx) the broker needs the TypeScript loader; built code runs as is.
  return import.meta.url.endsWith('.ts') ? new URL('./dev-broker.mjs', import.meta.url) : new URL('./broker.js', import.meta.url);
}

function cleanUp(): void {
  for (let i = 0; i < commandPids.length; i++) {
    const pid = Atomics.exchange(commandPids, i, 0);
    if (pid > 0) killCommandProcess(pid);
  }
  if (folder) rmSync(folder, { recursive: true, force: true });
}

let cleanUpRegistered = false;

function openBridge(): Bridge {
  if (!cleanUpRegistered) process.once('exit', cleanUp);
  cleanUpRegistered = true;
  const channel = new MessageChannel();
  const flag = new SharedArrayBuffer(4);
  const broker = new Worker(brokerEntry(), {
    workerData: { port: channel.port2, flag, pids: commandPids, ownGroup: !isMainThread },
    transferList: [channel.port2],
  });
  // Neither the broker nor its port may keep a finished command alive.
  broker.unref();
  channel.port1.unref();
  return { broker, port: channel.port1, signal: new Int32Array(flag) };
}

/** Sends one ask to the broker and waits for its reply; the broker enforces the time limit, this wait only guards against a dead broker. */
function ask(message: BrokerAsk): BrokerReply {
  bridge ??= openBridge();
  const { port, signal } = bridge;
  Atomics.store(signal, 0, 0);
  port.postMessage(message);
  const deadline = Date.now() + message.timeoutMs + 30_000;
  while (Atomics.load(signal, 0) === 0) {
    const left = deadline - Date.now();
    if (left <= 0) {
      void bridge.broker.terminate();
      bridge = null;
      throw new CommandError(`${message.declaration.id}: hhat's broker thread for estimator commands did not answer; it was restarted`);
    }
    Atomics.wait(signal, 0, 0, left);
  }
  // The reply is posted before the flag is raised, so it is already queued on this port.
  const received = receiveMessageOnPort(port);
  if (!received) throw new CommandError(`${message.declaration.id}: hhat's broker thread raised its flag without a reply`);
  return received.message as BrokerReply;
}

function writeNpy(path: string, sample: Sample): void {
  const fd = openSync(path, 'w');
  try {
    writeSync(fd, npyFloat64Header([sample.n, sample.dim]));
    writeSync(fd, float64Bytes(sample.data));
  } finally {
    closeSync(fd);
  }
}

/** The request for one sample: P's (or the only) .npy, and Q's for a divergence, written to this thread's folder. */
function prepareRequest(sample: Sample, settings: Settings): EstimateRequest {
  if (folder === null) {
    folder = mkdtempSync(join(tmpdir(), 'hhat-command-'));
    for (const listener of folderListeners) listener(folder);
  }
  const request: EstimateRequest = { npy: join(folder, 'p.npy'), n: sample.n, dim: sample.dim, settings };
  writeNpy(request.npy, sample);
  if (sample.xDim !== undefined) {
    request.xDim = sample.xDim;
    request.yDim = sample.yDim ?? sample.dim - sample.xDim;
    // Conditional mutual information: Z takes the columns after X's and Y's.
    if (sample.yDim !== undefined) request.zDim = sample.dim - sample.xDim - sample.yDim;
  }
  if (sample.q) {
    request.npyQ = join(folder, 'q.npy');
    request.nQ = sample.q.n;
    writeNpy(request.npyQ, sample.q);
  }
  return request;
}

function estimateWith(declaration: CommandDeclaration, sample: Sample, settings: Settings): number {
  const limit = estimateTimeLimit(limits, sample.n);
  const reply = ask({
    declaration,
    request: prepareRequest(sample, settings),
    timeoutMs: limit * 1000,
    limitText: timeLimitText(limits, sample.n),
  });
  if (!reply.ok) throw new CommandError(reply.reason, reply.reported === true);
  return reply.value;
}

/** The Estimators made by commandEstimator in this thread. */
const commandEstimators = new WeakSet<Estimator>();

/** Whether `estimator` runs a declared command (its time limit is then enforced by the broker). */
export function isCommandEstimator(estimator: Estimator): boolean {
  return commandEstimators.has(estimator);
}

/** The Estimator that runs a declared command. */
export function commandEstimator(declaration: CommandDeclaration): Estimator {
  const grid = Object.entries(declaration.tuning).map(([setting, values]) => ({ setting, values }));
  const estimator: Estimator = {
    id: declaration.id,
    family: declaration.family,
    quantity: declaration.quantity,
    summary: declaration.summary,
    settings: declaration.settings,
    dims: [declaration.dims[0], declaration.dims[1] ?? Infinity],
    reference: declaration.reference,
    ...(grid.length ? { tuning: () => grid } : {}),
    estimate: (sample, settings) => estimateWith(declaration, sample, settings),
  };
  commandEstimators.add(estimator);
  return estimator;
}

/**
 * Registers the commands as estimators in this thread (an id already registered, built-in or not, is replaced
 * and keeps its cell names), and sets the time limits their estimates are held to.
 */
export function useEstimatorCommands(declarations: readonly CommandDeclaration[] | undefined, planLimits: Limits = DEFAULT_LIMITS): string[] {
  limits = planLimits;
  for (const declaration of declarations ?? []) replaceEstimator(commandEstimator(declaration), 'command');
  return (declarations ?? []).map((d) => d.id);
}

/** Stops this thread's command processes and removes its temporary folder (the end of a command-line run). */
export function closeEstimatorCommands(): void {
  if (bridge) {
    void bridge.broker.terminate();
    bridge = null;
  }
  cleanUp();
  folder = null;
}
