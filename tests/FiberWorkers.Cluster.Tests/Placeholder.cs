namespace FiberWorkers.Cluster.Tests;
