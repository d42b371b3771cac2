import { expectRecord, type StateRecord } from '../core/state/record.js';
import type { ChannelEvent } from './channel-events.js';

/**
 * Whether a channel was steady (its averaging valid: state steady or precise) when it took a given
 * sample, from the events its pipeline raised: steady from the index of a `steady` or
 * `stationarity-regained` event, not steady from the index of a `stationarity-lost` event or of a
 * window restart. Transitions only ever come at the newest sample, so the answer for a sample never
 * changes once it is taken: derived results use it to judge their inputs at the samples a row was
 * made of, the same way in the daemon and in `plateau analyze` whenever each brings them up to date.
 * The wall-clock `stale` state is not part of it (analyze has no clock).
 * Memory: the last MAX_TRANSITIONS transitions (older samples than the oldest one kept read as not
 * steady, which only matters for a window that reaches further back than that many changes).
 */
export interface SteadinessState extends StateRecord<'steadiness', 1> {
  /** Oldest first. */
  transitions: { index: number; steady: boolean }[];
}

const MAX_TRANSITIONS = 64;

export class SteadyHistory {
  private indices: number[] = [];
  private values: boolean[] = [];

  /** Reads the events a sample raised. */
  noteEvents(events: readonly ChannelEvent[]): void {
    for (const event of events) {
      if (event.kind === 'steady' || event.kind === 'stationarity-regained') this.note(event.at, true);
      else if (event.kind === 'stationarity-lost') this.note(event.at, false);
    }
  }

  /** The window restarts (warming again) at sample `index`. */
  restart(index: number): void {
    this.note(index, false);
  }

  steadyAt(index: number): boolean {
    let low = 0;
    let high = this.indices.length;
    // The last transition at or before `index`.
    while (low < high) {
      const mid = (low + high) >> 1;
      if ((this.indices[mid] as number) <= index) low = mid + 1;
      else high = mid;
    }
    return low > 0 && (this.values[low - 1] as boolean);
  }

  state(): SteadinessState {
    return { record: 'steadiness', version: 1, transitions: this.indices.map((index, i) => ({ index, steady: this.values[i] as boolean })) };
  }

  /** @throws RangeError for a record of another name or version. */
  load(state: SteadinessState): void {
    expectRecord(state, 'steadiness', 1);
    this.indices = state.transitions.map((t) => t.index);
    this.values = state.transitions.map((t) => t.steady);
  }

  private note(index: number, steady: boolean): void {
    const last = this.indices.length - 1;
    if (last >= 0 && (this.indices[last] as number) === index) {
      this.values[last] = steady;
      return;
    }
    if (last >= 0 && this.values[last] === steady) return;
    this.indices.push(index);
    this.values.push(steady);
    if (this.indices.length > MAX_TRANSITIONS) {
      this.indices.shift();
      this.values.shift();
    }
  }
}
