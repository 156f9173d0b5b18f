/**
 * Writing results safely: whole files through an exclusively created temporary file that is flushed to disk
 * and renamed over the target (a reader or a crash never sees half a file), checkpoint lines flushed one by
 * one, a lock that keeps two runs off one output, and file-system failures as one line that says what to do.
 *
 *   writeFileAtomic('results/run.json', text);
 *   const release = acquireLock('results/run.json');   // throws if another live process holds it
 */
import { randomBytes } from 'node:crypto';
import {
  closeSync,
  existsSync,
  constants,
  fsyncSync,
  linkSync,
  lstatSync,
  mkdirSync,
  openSync,
  readdirSync,
  readSync,
  readFileSync,
  realpathSync,
  renameSync,
  rmSync,
  statSync,
  unlinkSync,
  writeSync,
} from 'node:fs';
import { hostname } from 'node:os';
import { basename, dirname, join, resolve } from 'node:path';
import { EnvironmentError, UsageError } from './errors.js';

/**
 * Refuses an output path that is an existing folder, as a usage mistake (exit 2) before any work, naming a file
 * inside it as an example; writing would otherwise fail at the end, as a failure of the machine.
 */
export function refuseFolderOutput(flag: string, path: string, exampleName: string): void {
  let folder: boolean;
  try {
    folder = statSync(path).isDirectory();
  } catch {
    return;
  }
  if (folder) throw new UsageError(`${flag} ${path} is a folder; give a file's path, e.g. ${flag} ${join(path, exampleName)}`);
}

/** Refuses a folder option (--svg-dir) that names something other than a folder: a usage mistake, found before any work. */
export function refuseNonFolder(flag: string, path: string): void {
  let folder: boolean;
  try {
    folder = statSync(path).isDirectory();
  } catch {
    return;
  }
  if (!folder) throw new UsageError(`${flag} ${path} is a file, not a folder; give a folder's name (it is created if missing)`);
}

/** Whether two paths name one file (the same path, or links to one), as far as the file system says. */
export function sameFile(a: string, b: string): boolean {
  if (resolve(a) === resolve(b)) return true;
  try {
    const [x, y] = [statSync(a), statSync(b)];
    return x.dev === y.dev && x.ino === y.ino;
  } catch {
    return false;
  }
}

/** What hhat writes at an output path, recognised by the file's first bytes. */
export const OUTPUT_KINDS = {
  run: { what: 'an hhat run file', isOurs: (head: string) => /^\s*\{\s*"schemaVersion":\s*\d+,\s*"kind":\s*"hhat-run"/.test(head) },
  report: { what: 'an HTML page', isOurs: (head: string) => /^\s*<!doctype html/i.test(head) },
  scores: { what: "hhat's score table", isOurs: (head: string) => head.startsWith('scenario,estimator,n,') },
} as const;

/**
 * Refuses to write `path` over an existing, non-empty regular file that is not what hhat writes there: an output
 * flag given a data file's name by mistake would replace the data. An empty file (made by mktemp) is free to take;
 * devices and pipes are left to the writer's own checks.
 */
export function refuseForeignOutput(flag: string, path: string, kind: keyof typeof OUTPUT_KINDS, hint: string): void {
  let head: string;
  try {
    const stat = statSync(path);
    if (!stat.isFile() || stat.size === 0) return;
    const fd = openSync(path, 'r');
    try {
      const bytes = Buffer.alloc(256);
      head = bytes.subarray(0, readSync(fd, bytes, 0, bytes.length, 0)).toString('utf8');
    } finally {
      closeSync(fd);
    }
  } catch {
    return;
  }
  const { what, isOurs } = OUTPUT_KINDS[kind];
  if (!isOurs(head)) throw new UsageError(`${flag} ${path} is an existing file that is not ${what}; ${hint}`);
}

/** Whether `path` is a file holding at least one byte (an empty file, as a shell's `> out` leaves, may be taken). */
export function nonEmptyFile(path: string): boolean {
  try {
    const stat = statSync(path);
    return stat.isFile() && stat.size > 0;
  } catch {
    return false;
  }
}

/** Refuses two outputs (or an output and an input) of one command that name the same file: the later write would replace the earlier. */
export function refuseSameFile(first: [flag: string, path: string], second: [flag: string, path: string]): void {
  if (sameFile(first[1], second[1])) throw new UsageError(`${second[0]} ${second[1]} is the same file as ${first[0]}; give it another name`);
}

/** What a failed file operation means for the user, in words. */
export function describeFileError(error: unknown, action: string, path: string): string {
  const code = (error as NodeJS.ErrnoException).code;
  switch (code) {
    case 'ENOSPC':
    case 'EDQUOT':
      return `the disk is full: cannot ${action} ${path}`;
    case 'EROFS':
      return `${dirname(path)} is on a read-only file system: cannot ${action} ${path}`;
    case 'EACCES':
    case 'EPERM':
      return `permission denied: cannot ${action} ${path}`;
    case 'ENOENT':
      // Writing where the folder exists but takes no new files (/proc, /sys) fails the same way.
      return !action.startsWith('read') && existsSync(dirname(path))
        ? `cannot ${action} ${path}: ${dirname(path)} does not take new files (no such file or directory)`
        : `cannot ${action} ${path}: its folder does not exist`;
    case 'ENOTDIR':
      return `cannot ${action} ${path}: a part of that path is a file, not a folder`;
    case 'EISDIR':
      return `cannot ${action} ${path}: it is a folder`;
    case 'EEXIST':
      return `cannot ${action} ${path}: a file of that name is in the way`;
    default:
      return `cannot ${action} ${path}: ${(error as Error).message}`;
  }
}

/** Why a file could not be read, in words (a data file, a plan): no such file, a folder, no permission, or the system's first line. */
export function readFailureReason(error: unknown): string {
  const code = (error as NodeJS.ErrnoException).code;
  if (code === 'ENOENT') return 'no such file';
  if (code === 'EISDIR') return 'it is a directory';
  if (code === 'EACCES' || code === 'EPERM') return 'permission denied';
  return (error as Error).message?.split('\n')[0] ?? String(error);
}

function fail(error: unknown, action: string, path: string, hint?: string): never {
  throw new EnvironmentError(`${describeFileError(error, action, path)}${hint ? `; ${hint}` : ''}`);
}

/** Creates a folder and its parents, as one line on failure. */
export function ensureFolder(folder: string, hint?: string): void {
  try {
    makeFolders(folder);
  } catch (error) {
    fail(error, 'create the folder', folder, hint);
  }
}

/**
 * mkdir -p, one level at a time from the nearest folder that exists. Node 20's recursive mkdirSync never returns
 * where the file system answers "no such file" for a child of a folder that exists (/proc/x): it tries again for ever.
 */
function makeFolders(folder: string): void {
  const missing: string[] = [];
  for (let at = resolve(folder); !existsSync(at);) {
    missing.push(at);
    const parent = dirname(at);
    if (parent === at) break;
    at = parent;
  }
  // An existing path: the recursive form returns at once for a folder and fails (EEXIST) for a file.
  if (!missing.length) mkdirSync(folder, { recursive: true });
  for (const path of missing.reverse()) {
    try {
      mkdirSync(path);
    } catch (error) {
      const code = (error as NodeJS.ErrnoException).code;
      // Made meanwhile by another process: as good as made here.
      if (code === 'EEXIST' && statSync(path).isDirectory()) continue;
      // Its parent exists (made just before, or found): a folder that cannot hold folders (/proc, /sys).
      if (code === 'ENOENT') throw new Error(`${dirname(path)} does not allow a folder there (no such file or directory)`, { cause: error });
      throw error;
    }
  }
}

function fsyncFolder(folder: string): void {
  // Makes the rename itself durable; some file systems cannot open a folder for that, which is harmless.
  try {
    const fd = openSync(folder, 'r');
    try {
      fsyncSync(fd);
    } finally {
      closeSync(fd);
    }
  } catch {
    /* best effort */
  }
}

const TEMPORARY = /\.[0-9a-f]{16}\.tmp$/;
/** A lock's draft, after the lock's own name: `.<host>.<pid>.<8 hex>.tmp`. */
const LOCK_DRAFT = /^\.([A-Za-z0-9-]*)\.(\d+)\.[0-9a-f]{8}\.tmp$/;

/** This machine's name as it can stand in a file name. */
function lockHostTag(): string {
  return hostname().replace(/[^A-Za-z0-9-]/g, '-');
}

/**
 * Writes all of `text`: a write may store fewer bytes than asked (a disk filling up does that, without an
 * error), so it repeats until everything is written or the file system reports why it cannot.
 */
function writeAll(fd: number, content: string | Uint8Array): void {
  const bytes = typeof content === 'string' ? Buffer.from(content, 'utf8') : content;
  let offset = 0;
  while (offset < bytes.length) {
    const written = writeSync(fd, bytes, offset, bytes.length - offset);
    if (written <= 0) throw Object.assign(new Error('no bytes written'), { code: 'ENOSPC' });
    offset += written;
  }
}

/** A file system's refusal (ENOSPC, EACCES, ...), as opposed to an error of the code producing the content. */
function isSystemError(error: unknown): boolean {
  const code = (error as NodeJS.ErrnoException | null)?.code;
  return typeof code === 'string' && /^E[A-Z0-9]+$/.test(code);
}

/**
 * Writes `content` to `path` atomically: a temporary file created exclusively (O_EXCL, random name, so no
 * existing file or link is followed), flushed to disk, renamed over `path`. On failure nothing is left behind.
 * Content given as chunks (text or bytes, possibly produced lazily) is written one chunk at a time, so a large
 * file is never held whole; an error thrown while producing a chunk is passed on as it is.
 */
export function writeFileAtomic(given: string, content: string | Uint8Array | Iterable<string | Uint8Array>, hint?: string): void {
  if (isSpecialFile(given)) return writeSpecial(given, content, hint);
  const path = followLink(given);
  ensureFolder(dirname(path), hint);
  const temporary = `${path}.${randomBytes(8).toString('hex')}.tmp`;
  let fd: number | undefined;
  try {
    fd = openSync(temporary, constants.O_WRONLY | constants.O_CREAT | constants.O_EXCL, 0o644);
    if (typeof content === 'string' || content instanceof Uint8Array) writeAll(fd, content);
    else for (const chunk of content) writeAll(fd, chunk);
    fsyncSync(fd);
    closeSync(fd);
    fd = undefined;
    pauseForKillTest(path);
    renameSync(temporary, path);
  } catch (error) {
    if (fd !== undefined) closeSync(fd);
    // A folder that refuses the write may refuse the clean-up too; the write's own error is the one to report.
    try {
      rmSync(temporary, { force: true });
    } catch {
      /* nothing was created, or nothing can be removed */
    }
    if (!isSystemError(error) && typeof content !== 'string') throw error;
    fail(error, 'write', given, hint);
  }
  fsyncFolder(dirname(path));
}

/** Where a write to `path` lands: the file a symbolic link points to (replacing the link would cut it), else `path`. */
function followLink(path: string): string {
  try {
    return lstatSync(path).isSymbolicLink() ? realpathSync(path) : path;
  } catch {
    return path; // missing, or a dangling link: written as a new file
  }
}

/** A device, pipe or socket (/dev/null, /dev/stdout, a FIFO): written in place, never replaced by a file. */
export function isSpecialFile(path: string): boolean {
  try {
    const stat = statSync(path);
    return !stat.isFile() && !stat.isDirectory();
  } catch {
    return false;
  }
}

function writeSpecial(path: string, content: string | Uint8Array | Iterable<string | Uint8Array>, hint?: string): void {
  let fd: number | undefined;
  try {
    fd = openSync(path, 'w');
    if (typeof content === 'string' || content instanceof Uint8Array) writeAll(fd, content);
    else for (const chunk of content) writeAll(fd, chunk);
  } catch (error) {
    if (!isSystemError(error) && typeof content !== 'string') throw error;
    fail(error, 'write', path, hint);
  } finally {
    if (fd !== undefined) closeSync(fd);
  }
}

/**
 * A test seam for test/scripts/kill-test.ts: HHAT_PAUSE_BEFORE_RENAME_MS holds the write of a run file (not of a
 * checkpoint) between its flushed temporary and the rename, so the script can kill the process exactly there.
 */
function pauseForKillTest(path: string): void {
  const ms = Number(process.env.HHAT_PAUSE_BEFORE_RENAME_MS);
  if (ms > 0 && path.endsWith('.json')) Atomics.wait(new Int32Array(new SharedArrayBuffer(4)), 0, 0, ms);
}

/**
 * Removes temporaries that an earlier crash (or an interrupt) left beside `path`. Without a lock on `path`, pass
 * `idleMs`: only temporaries not written to for that long go, so another process's write in progress is spared.
 */
export function removeLeftoverTemporaries(path: string, idleMs = 0): number {
  let removed = 0;
  try {
    for (const name of readdirSync(dirname(path))) {
      if (name.startsWith(`${basename(path)}.`) && TEMPORARY.test(name)) {
        const temporary = join(dirname(path), name);
        if (idleMs > 0 && Date.now() - statSync(temporary).mtimeMs < idleMs) continue;
        rmSync(temporary, { force: true });
        removed++;
      }
    }
  } catch {
    /* a missing folder has nothing to clean */
  }
  return removed;
}

/** Appends lines to a file, each flushed to disk before the next is accepted. */
export interface Appender {
  append(line: string): void;
  close(): void;
}

export function openAppender(path: string, hint?: string): Appender {
  let fd: number;
  try {
    fd = openSync(path, 'a');
  } catch (error) {
    fail(error, 'open', path, hint);
  }
  return {
    append(line: string) {
      try {
        writeAll(fd, `${line}\n`);
        fsyncSync(fd);
      } catch (error) {
        fail(error, 'append to', path, hint);
      }
    },
    close() {
      try {
        closeSync(fd);
      } catch {
        /* already closed */
      }
    },
  };
}

interface LockHolder {
  pid: number;
  host: string;
  started: string;
}

function alive(pid: number): boolean {
  try {
    process.kill(pid, 0);
    return true;
  } catch (error) {
    // EPERM: the process exists but belongs to someone else.
    return (error as NodeJS.ErrnoException).code === 'EPERM';
  }
}

/** Links the written draft into place; where the file system has no hard links, creates the lock exclusively instead. */
function linkLock(draft: string, lock: string, me: LockHolder): void {
  try {
    linkSync(draft, lock);
  } catch (error) {
    const code = (error as NodeJS.ErrnoException).code;
    if (code !== 'EPERM' && code !== 'ENOTSUP' && code !== 'ENOSYS' && code !== 'EOPNOTSUPP') throw error;
    const fd = openSync(lock, constants.O_WRONLY | constants.O_CREAT | constants.O_EXCL, 0o644);
    try {
      writeAll(fd, JSON.stringify(me));
    } finally {
      closeSync(fd);
    }
  }
}

/**
 * Removes drafts of `lock` that processes of this machine left when they were killed while taking it (a draft
 * lives for microseconds, but a kill can land inside them). A draft of a live process, or of another machine's
 * (a shared folder), whose process cannot be checked, is left alone.
 */
function removeDeadDrafts(lock: string): void {
  const folder = dirname(lock);
  const prefix = basename(lock);
  const host = lockHostTag();
  try {
    for (const name of readdirSync(folder)) {
      const draft = name.startsWith(prefix) ? LOCK_DRAFT.exec(name.slice(prefix.length)) : null;
      if (draft && draft[1] === host && !alive(Number(draft[2]))) rmSync(join(folder, name), { force: true });
    }
  } catch {
    /* a draft left behind is untidy, not harmful */
  }
}

/**
 * Takes `<path>.lock` for this process, or refuses while another live process on this machine holds it.
 * A lock whose process is gone (a crash, a kill) is stale and taken over; a lock from another machine (a
 * shared folder) is respected, since its process cannot be checked. Returns the release function.
 */
export function acquireLock(path: string, hint?: string): () => void {
  const lock = `${path}.lock`;
  ensureFolder(dirname(path), hint);
  const me: LockHolder = { pid: process.pid, host: hostname(), started: new Date().toISOString() };
  for (let attempt = 0; attempt < 2; attempt++) {
    // Written whole under a private name, then linked into place (which fails if the lock exists): another
    // process never sees an empty lock, which it would take for a crashed writer's and take over.
    const draft = `${lock}.${lockHostTag()}.${process.pid}.${randomBytes(4).toString('hex')}.tmp`;
    try {
      const fd = openSync(draft, constants.O_WRONLY | constants.O_CREAT | constants.O_EXCL, 0o644);
      try {
        writeAll(fd, JSON.stringify(me));
      } finally {
        closeSync(fd);
      }
      linkLock(draft, lock, me);
      removeDeadDrafts(lock);
      return () => rmSync(lock, { force: true });
    } catch (error) {
      if ((error as NodeJS.ErrnoException).code !== 'EEXIST') fail(error, 'create the lock', lock, hint);
    } finally {
      rmSync(draft, { force: true });
    }
    let holder: LockHolder | null;
    try {
      holder = JSON.parse(readFileSync(lock, 'utf8')) as LockHolder;
    } catch {
      holder = null;
    }
    if (holder && (holder.host !== me.host || alive(holder.pid))) {
      throw new EnvironmentError(
        `${path} is being written by process ${holder.pid} on ${holder.host} (since ${holder.started}); wait for it to finish, or choose another --out`,
      );
    }
    // Stale (its process is gone) or unreadable (a crash while writing it): take it over.
    try {
      unlinkSync(lock);
    } catch {
      /* another process may have taken it over first; the next attempt tells */
    }
  }
  throw new EnvironmentError(`${path}.lock keeps reappearing: another process is starting on the same --out; choose another --out`);
}
