/**
 * Named, versioned state records. Every object whose state is checkpointed saves a plain-data
 * record that names what it is and the layout's version, with named fields (never positional
 * arrays), and its restore refuses a record of another name or version instead of casting it: a
 * checkpoint of another version is set aside by the engine (src/engine/channel-state.ts) and the
 * channel replayed from its stored samples, and the log says why.
 */
export interface StateRecord<Name extends string = string, Version extends number = number> {
  record: Name;
  version: Version;
}

/** @throws RangeError when `state` is not a record of that name and version. */
export function expectRecord(state: unknown, record: string, version: number): void {
  const header = state as Partial<StateRecord> | null;
  if (header === null || typeof header !== 'object' || header.record !== record || header.version !== version) {
    const found = header !== null && typeof header === 'object' && typeof header.record === 'string' ? `${header.record} version ${String(header.version)}` : 'no named record';
    throw new RangeError(`expected a ${record} record of version ${version}, found ${found}`);
  }
}
