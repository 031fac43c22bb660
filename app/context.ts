import { createContext } from "react-router";
import type { BodyRefusal } from "./services/body-limits";

/** Per-request facts the Express entry hands to React Router (server.ts → getLoadContext). */
export type RequestInfo = {
  requestId: string;
  /** CSP nonce for this response's inline and module scripts. */
  nonce: string;
  /** The client's address as Express sees it (through the proxies TRUST_PROXY trusts). */
  clientIp: string;
  /** Set when server.ts refused the request body (too large, or a body on GET/HEAD): the root answers it. */
  bodyRefusal?: BodyRefusal | null;
};

export const requestInfoContext = createContext<RequestInfo>({ requestId: "unknown", nonce: "", clientIp: "unknown" });

export type Role = "administrator" | "integrity_engineer" | "plant_manager" | "contractor_technician";
export type Units = "si" | "us";

/** The signed-in person, as the session middleware found them (null when signed out). */
export type SessionUser = {
  id: string;
  email: string;
  name: string;
  role: Role;
  units: Units;
  /** The zone organisation-wide pages are shown in: the person's choice, else the first site's, else UTC. */
  timeZone: string;
  /** Whether the person chose timeZone on their profile (false: it is the default). */
  timeZoneChosen: boolean;
  organisation: { id: string; name: string; kind: "owner" | "contractor" };
  sessionIdHash: string;
};

export const userContext = createContext<SessionUser | null>(null);

/**
 * An API client acting through its bearer token, inside its owner's data only. Model
 * functions that the API reads take `SessionUser | ApiClientReader`; the route has checked
 * the token's scope before calling them.
 */
export type ApiClientReader = {
  clientId: string;
  clientName: string;
  scopes: string[];
  requestsPerMinute: number | null;
  organisation: { id: string; name: string; kind: "owner" };
};

export type Reader = SessionUser | ApiClientReader;
export const isApiClient = (r: Reader): r is ApiClientReader => "clientId" in r;

/**
 * What the bearer middleware found on an /api request: no Authorization header, or a
 * header judged alone (the session cookie beside it is then ignored).
 */
export type BearerAuth =
  | { kind: "none" }
  | { kind: "bearer"; client: ApiClientReader }
  | { kind: "refused"; reason: "malformed" | "unknown" | "revoked" | "expired" };

export const bearerContext = createContext<BearerAuth>({ kind: "none" });
