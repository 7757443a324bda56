#include "plimsoll/cli/app.h"

int main(int argc, char** argv) { return plimsoll::cli::Main(argc, argv); }
