// Independent OPC UA peer server (node-opcua 2.182.2) for the exergywatch
// security and authentication tests. Started and stopped by the Go tests
// (ingest/opcuasrc/peer_test.go); not part of the product.
//
// Environment:
//   PEER_PORT  TCP port (required)
//   PEER_PKI   directory for the server PKI (created; default: a temp dir)
//   PEER_USER / PEER_PASSWORD  the one valid user (default ew / ew-secret)
//
// The server's own application instance certificate (made by node-opcua in
// PEER_PKI/own) is also written, DER, to PEER_PKI/server_certificate.der
// before READY, so that the tests can trust it by a path independent of
// what the server sends over the wire.
//
// Endpoints: Basic256Sha256 with Sign and with SignAndEncrypt only (no
// None endpoint), anonymous access disabled, username/password checked.
// Unknown client certificates are accepted automatically (test PKI).
// Variables: ns=1;s=Turbine1.PT101 (Double, increments by 1 every 100 ms),
// ns=1;s=Turbine1.TT101 (Double, 800.0).
// Prints "READY <endpointUrl>" on stdout when listening.
"use strict";
const fs = require("fs");
const os = require("os");
const path = require("path");
const {
  OPCUAServer, OPCUACertificateManager, MessageSecurityMode, SecurityPolicy, DataType, Variant, StatusCodes,
} = require("node-opcua");

async function main() {
  const port = parseInt(process.env.PEER_PORT || "", 10);
  if (!port) {
    throw new Error("PEER_PORT not set");
  }
  const pki = process.env.PEER_PKI || fs.mkdtempSync(path.join(os.tmpdir(), "exergywatch-peer-"));
  const user = process.env.PEER_USER || "ew";
  const password = process.env.PEER_PASSWORD || "ew-secret";

  const serverCertificateManager = new OPCUACertificateManager({
    automaticallyAcceptUnknownCertificate: true,
    rootFolder: path.join(pki, "own"),
  });
  const userCertificateManager = new OPCUACertificateManager({
    automaticallyAcceptUnknownCertificate: true,
    rootFolder: path.join(pki, "user"),
  });
  const server = new OPCUAServer({
    port,
    hostname: "127.0.0.1",
    resourcePath: "/exergywatch",
    securityPolicies: [SecurityPolicy.Basic256Sha256],
    securityModes: [MessageSecurityMode.Sign, MessageSecurityMode.SignAndEncrypt],
    allowAnonymous: false,
    serverCertificateManager,
    userCertificateManager,
    userManager: {
      isValidUser: (u, p) => u === user && p === password,
    },
    buildInfo: { productName: "exergywatch-opcua-peer" },
  });
  await server.initialize();
  const addressSpace = server.engine.addressSpace;
  const ns = addressSpace.getOwnNamespace();
  const turbine = ns.addObject({ organizedBy: addressSpace.rootFolder.objects, browseName: "Turbine1" });
  let p = 100.0;
  ns.addVariable({
    componentOf: turbine, nodeId: "s=Turbine1.PT101", browseName: "PT101", dataType: "Double", minimumSamplingInterval: 100,
    value: { get: () => new Variant({ dataType: DataType.Double, value: p }) },
  });
  ns.addVariable({
    componentOf: turbine, nodeId: "s=Turbine1.TT101", browseName: "TT101", dataType: "Double", minimumSamplingInterval: 100,
    value: { get: () => new Variant({ dataType: DataType.Double, value: 800.0 }) },
  });
  const timer = setInterval(() => { p += 1; }, 100);
  await server.start();
  fs.writeFileSync(path.join(pki, "server_certificate.der"), server.getCertificate());
  process.stdout.write("READY " + server.getEndpointUrl() + "\n");
  const stop = async () => {
    clearInterval(timer);
    await server.shutdown(0);
    process.exit(0);
  };
  process.on("SIGTERM", stop);
  process.on("SIGINT", stop);
  // Exit when the parent test process goes away (stdin closes).
  process.stdin.on("end", stop);
  process.stdin.resume();
}

main().catch((err) => {
  process.stderr.write("peer failed: " + (err && err.stack ? err.stack : err) + "\n");
  process.exit(1);
});
