import type { RouterContextProvider } from "react-router";
import { requestInfoContext } from "../context";

/**
 * RFC 9457 problem details: every /api/v1 error answers with one of these.
 */
const titles: Record<number, string> = {
  400: "Bad request",
  401: "Not signed in",
  403: "Forbidden",
  404: "Not found",
  405: "Method not allowed",
  409: "Conflict",
  413: "Payload too large",
  415: "Unsupported media type",
  422: "Unprocessable content",
  429: "Too many requests",
  500: "Internal server error",
  503: "Service unavailable",
};

export function problem(
  status: number,
  detail: string,
  options: { requestId?: string; extra?: Record<string, unknown>; headers?: HeadersInit } = {},
): Response {
  const headers = new Headers(options.headers);
  headers.set("Content-Type", "application/problem+json");
  headers.set("Cache-Control", "no-store");
  return new Response(
    JSON.stringify({
      type: `https://wallcast.example/problems/${status}`,
      title: titles[status] ?? "Error",
      status,
      detail,
      requestId: options.requestId ?? "unknown",
      ...options.extra,
    }),
    { status, headers },
  );
}

export function requestIdOf(context: Readonly<RouterContextProvider>): string {
  return context.get(requestInfoContext).requestId;
}
