#include <catch2/catch.hpp>
#include <sstream>

#include "heft/catalog.hpp"
#include "heft/error.hpp"
