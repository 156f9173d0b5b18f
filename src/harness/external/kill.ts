/**
 * Ending an estimator command's process for good. Under a supervisor, commands start in a process group of
 * their own, and the whole group goes: a launcher (a version manager's shim, a shell script, `npx`) often runs
 * the real program as its child, and killing the launcher alone would leave that child sleeping in an estimate.
 * A command started from the main thread shares hhat's group; then only the process itself is killed.
 */
export function killCommandProcess(pid: number): void {
  try {
    process.kill(-pid, 'SIGKILL');
    return;
  } catch {
    // No group of that id (already gone, or a platform without groups): the process itself.
  }
  try {
    process.kill(pid, 'SIGKILL');
  } catch {
    // Already gone.
  }
}
