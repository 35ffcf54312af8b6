/**
 * The signals that ask kinhue to stop: Ctrl-C (SIGINT), a service manager or `kill` (SIGTERM), and a
 * closed terminal or SSH session (SIGHUP). All are handled alike, so a run stopped any of these ways
 * finishes cleanly.
 */
export const STOP_SIGNALS: readonly NodeJS.Signals[] = ['SIGINT', 'SIGTERM', 'SIGHUP'];

/**
 * Calls `handler` on each stop signal until the returned function is called.
 * @example
 *   const release = onStopSignals(() => controller.abort());
 *   try { await run(); } finally { release(); }
 */
export function onStopSignals(handler: (signal: NodeJS.Signals) => void): () => void {
  for (const signal of STOP_SIGNALS) process.on(signal, handler);
  return () => {
    for (const signal of STOP_SIGNALS) process.off(signal, handler);
  };
}
