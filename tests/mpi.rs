#![cfg(feature = "mpi")]
