//! Output writers (frames, NetCDF, atomic files): filled in by the output work.
