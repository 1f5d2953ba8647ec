/* The tool's version, shown by --version and written into every output's provenance. */
#ifndef TF_VERSION_H
#define TF_VERSION_H
#define TF_VERSION "0.1.0"
#endif
