/** Unexpected events of one part of the load (lost connections, daemon errors): all counted, the first few kept in words. */
export class FailureLog {
  count = 0;
  readonly first: string[] = [];

  constructor(private readonly keep = 20) {}

  add(problem: string): void {
    this.count++;
    if (this.first.length < this.keep) this.first.push(problem);
  }
}
