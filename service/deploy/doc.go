// Package deploy holds the Kubernetes manifests (nats.yaml: a 3-node NATS
// cluster with JetStream; fadeloopd.yaml: the gRPC service behind a
// headless Service; worker.yaml: the queue workers) and the container build
// file (Containerfile: a static, non-root fadeloopd image). Its test decodes
// every manifest strictly into the Kubernetes API types and checks that the
// pieces fit together.
package deploy
