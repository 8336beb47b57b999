/* Open MPI runs (issue 13; DEVELOPERS.md "MPI"). Built with -DOMEN_MPI
 * (`make MPI=1`) these start MPI when the process was launched by mpirun;
 * otherwise, and in the default build, every call is a no-op for a single
 * process (rank 0 of 1), so the program behaves as without MPI. */
#ifndef OMEN_MPI_H
#define OMEN_MPI_H

#include "omen/label.h"
#include "omen/model.h"

/* Starts MPI when mpirun (or a PMIx launcher) started this process; else
 * nothing. Returns 0, or negative OMEN_E* with omen_error_set(). */
int omen_mpi_init(int *argc, char ***argv);
/* Ends MPI (every rank must call it once, on the way out). */
void omen_mpi_finalize(void);
int omen_mpi_rank(void);    /* 0 without MPI */
int omen_mpi_size(void);    /* 1 without MPI */
int omen_mpi_built(void);   /* 1 when built with -DOMEN_MPI */
/* Ends every rank of the run with exit status code (after this rank has
 * printed its one error line). Returns only without MPI. */
void omen_mpi_abort(int code);
/* Waits for every rank. */
int omen_mpi_barrier(void);
/* Rank 0's *v on every rank. */
int omen_mpi_bcast_int(int *v);

/* Data-parallel training: sets o's part, parts and exchange for this rank
 * (nothing for one process). The exchange is one MPI_Allreduce (MPI_SUM)
 * of one contiguous buffer that holds every chunk's gradient over the
 * step's spans and every chunk's loss; each chunk slot is non-zero on the
 * one rank that computed it, so the sum is that rank's values exactly and
 * the ranks then add the chunks in chunk order as one process does. */
void omen_mpi_train_setup(omen_train_opts *o);
/* The exchange itself (exposed for the unit test). */
int omen_mpi_grad_exchange(void *ctx, float *const *grad, float *loss, int nchunks,
	const omen_span *spans, size_t nspans);

/* Path-sharded labelling: sets o's part, parts and gather for this rank
 * (nothing for one process). The gather is MPI_Gather of the byte counts,
 * then MPI_Gatherv of the bytes to rank 0. */
void omen_mpi_label_setup(omen_label_opts *o);
int omen_mpi_gather_bytes(void *ctx, const void *send, size_t n, void **all, size_t *counts);

#endif
