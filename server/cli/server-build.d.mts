/** What `npm start` runs: dist/server/main.js. */
export declare const BUILT_SERVER: string;
/** Whether the server's build is missing or older than any of its sources. */
export declare function serverBuildIsStale(): boolean;
/** Builds the server into dist/server with esbuild, replacing the old build whole. */
export declare function buildServer(opts?: { quiet?: boolean }): Promise<void>;
/** The newest modification time of a file, or of anything under a folder (0 when missing). */
export declare function newestMtime(path: string): number;
