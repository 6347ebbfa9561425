// The socket.io event maps both sides type against. Commands are imperative (`case:submit`),
// broadcasts are past tense (`case:submitted`). Every command answers through its acknowledgement.

export type Ack<T> = (response: AckResponse<T>) => void;
export type AckResponse<T> = { ok: true; data: T } | { ok: false; error: { code: string; message: string; field?: string; issues?: { field: string; message: string }[] } };

export interface SessionReady {
  userId: number;
  rooms: string[];
}

export interface ServerToClientEvents {
  'session:ready': (info: SessionReady) => void;
}

export interface ClientToServerEvents {
  'session:rooms': (ack: Ack<{ rooms: string[] }>) => void;
}

export const roomOfHospital = (id: number) => `hospital:${id}`;
export const roomOfAgency = (id: number) => `agency:${id}`;
export const roomOfUser = (id: number) => `user:${id}`;
