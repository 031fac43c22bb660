// Minimal types for s3rver 3.7.1 (the package ships none): only what fake-services/s3.ts uses.
declare module "s3rver" {
  import type { Server } from "node:http";
  import type { AddressInfo } from "node:net";

  interface S3rverBucketConfig {
    name: string;
    /** CORS or website configuration documents (XML). */
    configs?: Array<string | Buffer>;
  }

  interface S3rverOptions {
    address?: string;
    port?: number;
    silent?: boolean;
    directory?: string;
    resetOnClose?: boolean;
    allowMismatchedSignatures?: boolean;
    vhostBuckets?: boolean;
    serviceEndpoint?: string;
    configureBuckets?: S3rverBucketConfig[];
  }

  class S3rver {
    constructor(options?: S3rverOptions);
    httpServer?: Server;
    run(): Promise<AddressInfo>;
    close(): Promise<void>;
  }

  export default S3rver;
}
