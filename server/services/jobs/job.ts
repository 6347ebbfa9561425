/** A timed job; stopping it resolves once the round it may be in the middle of has ended. */
export interface Job { stop(): Promise<void> | void }
