#pragma once
// The one way accrue includes Boost.Asio. Boost 1.74's awaitable.hpp uses
// std::exchange without including <utility>, which g++ 12 in C++20 rejects;
// including it first here fixes that for every user.
#include <utility>

#include <boost/asio.hpp>
#include <boost/asio/awaitable.hpp>
#include <boost/asio/co_spawn.hpp>
#include <boost/asio/detached.hpp>
#include <boost/asio/redirect_error.hpp>
#include <boost/asio/use_awaitable.hpp>

namespace accrue {
namespace asio = boost::asio;
}
