"""Rotorbook: attitude dynamics of multirotor vehicles, as workbooks and calculation records."""

__version__ = "0.1.0"

#: Environment variables that set the thread count of numpy's BLAS / OpenMP, read once when
#: numpy is first imported. The kit's matrices are at most a few dozen rows, so its command
#: and record kernels set each to 1 unless the caller did (threaded BLAS on a busy machine
#: spends its time waiting). This module imports nothing, so setting them here is in time.
BLAS_THREAD_VARS = ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS")
