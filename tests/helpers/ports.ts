import { readFileSync } from "node:fs";
import net from "node:net";

/** A loopback port nobody listens on right now (the OS picks it; closed again at once). */
export async function freePort(): Promise<number> {
  return new Promise((resolve, reject) => {
    const srv = net.createServer();
    srv.once("error", reject);
    srv.listen(0, "127.0.0.1", () => {
      const { port } = srv.address() as net.AddressInfo;
      srv.close(() => resolve(port));
    });
  });
}

/**
 * A loopback port below the system's ephemeral range that nobody listens on now. The
 * operating system never hands such a port to `listen(0)`, so no other test's server
 * (they all take theirs from `freePort`) can start answering on it while a test relies on
 * it being closed.
 */
export async function portOutsideEphemeralRange(): Promise<number> {
  let low = 32768;
  try {
    const [first] = readFileSync("/proc/sys/net/ipv4/ip_local_port_range", "utf8").trim().split(/\s+/).map(Number);
    if (Number.isInteger(first) && first > 2048) low = first;
  } catch {
    // not Linux: the usual lower bound of the ephemeral range
  }
  for (let attempt = 0; attempt < 50; attempt++) {
    const port = 1024 + Math.floor(Math.random() * (low - 1024));
    const free = await new Promise<boolean>((resolve) => {
      const srv = net.createServer();
      srv.once("error", () => resolve(false));
      srv.listen(port, "127.0.0.1", () => srv.close(() => resolve(true)));
    });
    if (free) return port;
  }
  throw new Error("no free loopback port below the ephemeral range");
}
