/** Types of scripts/kafka.mjs, for the TypeScript test setup that imports it. */

export declare const DEFAULT_KAFKA_VERSION: string;
export declare const DEFAULT_INSTANCE: string;
export declare const BROKER_SETUP_CODE: 'PAIRFLOW_ERR_KAFKA_BROKER_SETUP';

export declare class BrokerSetupError extends Error {
  readonly code: 'PAIRFLOW_ERR_KAFKA_BROKER_SETUP';
  readonly retriable: true;
  constructor(message: string, cause?: unknown);
}

export interface BrokerSettings {
  version: string;
  cacheRoot: string;
  kafkaDir: string;
  versionDir: string;
  instancesDir: string;
  java: string;
  mvn: string;
  heap: string;
  startTimeoutMs: number;
  /** Fixed broker port, 0 = pick a free one. */
  brokerPort: number;
  jvmOpts: string[];
}

export interface BrokerState {
  instance: string;
  version: string;
  pid: number;
  watchdog: number;
  brokerPort: number;
  controllerPort: number;
  dataDir: string;
  logFile: string;
  props: string;
  startedAt: string;
}

export interface StartedBroker {
  brokers: string;
  started: boolean;
  pid: number;
  version: string;
  instance: string;
  logFile: string;
  stateFile: string;
  fetchMs: number;
  startMs: number;
}

interface EnvOption {
  env?: NodeJS.ProcessEnv;
}

export declare function brokerSettings(env?: NodeJS.ProcessEnv): BrokerSettings;
export declare function javaMajor(java: string): number;
export declare function fetchArtifacts(settings?: BrokerSettings): {
  version: string;
  libDir: string;
  downloaded: boolean;
  ms: number;
};
export declare function brokerAnswers(brokers: string[], timeoutMs?: number): Promise<boolean>;
export declare function startBroker(
  options?: EnvOption & { instance?: string; ownerPid?: number },
): Promise<StartedBroker>;
export declare function stopBroker(options?: EnvOption & { instance?: string }): Promise<{ stopped: boolean; instance: string }>;
export declare function listInstances(options?: EnvOption): string[];
export declare function brokerStatus(options?: EnvOption): Array<BrokerState & { alive: boolean }>;

/** Stops an instance's broker but keeps its data and ports (see kafka.mjs). */
export declare function haltBroker(options?: EnvOption & { instance?: string; graceMs?: number }): Promise<{ halted: boolean; instance: string }>;
/** Starts a halted instance again on the same data and ports. */
export declare function resumeBroker(options?: EnvOption & { instance?: string; ownerPid?: number }): Promise<{ brokers: string; pid: number; startMs: number }>;
