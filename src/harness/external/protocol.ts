/**
 * The estimator-command protocol, version 1: newline-delimited JSON on the command's stdin and stdout.
 *
 *   hhat → command   {"hhat": 1, "estimator": "my-kl", "quantity": "entropy", "settings": {"k": 3}}
 *   command → hhat   {"ready": true}                      (or {"error": "why it cannot start"})
 *   hhat → command   {"request": 1, "npy": "/tmp/hhat-command-x/p.npy", "n": 1000, "dim": 3, "settings": {"k": 3}}
 *                    mutual information adds "xDim" and "yDim" (X is the first xDim columns);
 *                    conditional mutual information adds "xDim", "yDim" and "zDim" (X, then Y, then Z);
 *                    transfer entropy adds "xDim": 1 and "yDim": 1 (column 0 the source series, 1 the target; rows in time order);
 *                    a divergence D(P‖Q) adds "npyQ" and "nQ" (P's sample is "npy")
 *   command → hhat   {"request": 1, "value": 1.2345}        (nats)  or  {"request": 1, "error": "too few points"}
 *
 * The .npy files are float64, little-endian, C order, shape (n, dim); hhat overwrites them for the next request,
 * so a command reads them before it answers. Request numbers count from 1 for each started process. When hhat
 * closes the command's stdin the command should exit. Anything on stderr is kept for failure reasons.
 *
 * This file holds what the calling thread and the broker thread (./broker.ts) say to each other.
 */
import type { SettingValue } from '../../core/contracts.js';
import type { CommandDeclaration } from './declaration.js';

export const PROTOCOL_VERSION = 1;

/** One estimate, as the command receives it (the request number is the broker's). */
export interface EstimateRequest {
  npy: string;
  n: number;
  dim: number;
  settings: Record<string, SettingValue>;
  xDim?: number;
  yDim?: number;
  zDim?: number;
  npyQ?: string;
  nQ?: number;
}

/** Calling thread → broker. */
export interface BrokerAsk {
  declaration: CommandDeclaration;
  request: EstimateRequest;
  /** The estimate's time limit, ms, and how to describe it in a failure. */
  timeoutMs: number;
  limitText: string;
}

/** Broker → calling thread: the value, or why there is none. */
/** `reported`: the command answered with an error of its own (a refusal), rather than failing to answer. */
export type BrokerReply = { ok: true; value: number } | { ok: false; reason: string; reported?: boolean };

/** Room for the pids of one thread's running estimator commands (one process per command id). */
export const COMMAND_PID_SLOTS = 8;
