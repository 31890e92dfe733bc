// The fault and load tests run real servers as child processes on a 2-core machine; running test classes at once
// would starve their heartbeats and make timings meaningless.
[assembly: CollectionBehavior(DisableTestParallelization = true)]
