/** Exit codes every sparsewire command keeps to (docs/cli.md lists them for scripts). */
export const EXIT = {
  /** Done as asked. */
  ok: 0,
  /** Something failed at run time: daemon unreachable, I/O error, refused frames, daemon error. */
  failure: 1,
  /** The command line was wrong (unknown command or option, bad value). */
  usage: 2,
  /** `replay --check`: results differ from the recorded ones beyond the tolerance, or are missing. */
  regression: 3,
  /** A recording is damaged (torn or corrupt tail) or is not a recording at all. */
  damaged: 4,
  /** The daemon refused the access token. */
  accessRefused: 5,
} as const;
