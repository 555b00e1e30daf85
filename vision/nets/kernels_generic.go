package nets

func fastKernels() kernels { return kernels{nn: nnBlocked, nt: ntBlocked, tn: tnBlocked} }
