#include "proto/tls_profile.h"

#include <openssl/err.h>
#include <openssl/pem.h>
#include <openssl/ssl.h>
#include <openssl/x509v3.h>

#include <algorithm>
#include <boost/asio/ip/address.hpp>
#include <cstdio>
#include <cstring>
#include <ctime>

namespace sightfix {
namespace {

namespace ssl = boost::asio::ssl;

// ALPN's wire form: a length byte, then the identifier.
const std::string& AlpnWire() {
  static const std::string wire =
      std::string(1, static_cast<char>(std::strlen(kWireAlpn))) + kWireAlpn;
  return wire;
}

std::string OpenSslReason(const boost::system::error_code& ec) {
  std::string why = ec.message();
  if (unsigned long e = ERR_get_error()) {
    char buf[256];
    ERR_error_string_n(e, buf, sizeof buf);
    why = buf;
  }
  ERR_clear_error();
  return why;
}

// The server's ALPN choice: ours, or a fatal no_application_protocol alert.
int SelectAlpn(SSL*, const unsigned char** out, unsigned char* outlen, const unsigned char* in,
               unsigned int inlen, void*) {
  unsigned char* chosen = nullptr;
  const std::string& ours = AlpnWire();
  if (SSL_select_next_proto(&chosen, outlen, reinterpret_cast<const unsigned char*>(ours.data()),
                            static_cast<unsigned>(ours.size()), in,
                            inlen) != OPENSSL_NPN_NEGOTIATED)
    return SSL_TLSEXT_ERR_ALERT_FATAL;
  *out = chosen;
  return SSL_TLSEXT_ERR_OK;
}

// TLS 1.3 only, no compression, no renegotiation (1.3 has none).
Status Profile(ssl::context& ctx) {
  SSL_CTX* h = ctx.native_handle();
  if (SSL_CTX_set_min_proto_version(h, TLS1_3_VERSION) != 1 ||
      SSL_CTX_set_max_proto_version(h, TLS1_3_VERSION) != 1)
    return Status::Internal("TLS: this OpenSSL cannot be limited to TLS 1.3");
  ctx.set_options(ssl::context::no_compression);
  return Status::Ok();
}

// Loads one PEM file into the context through `load`; the error names the file.
template <typename Load>
Status LoadFile(const char* what, const std::string& path, Load load) {
  boost::system::error_code ec;
  load(ec);
  if (ec)
    return Status::InvalidArgument("TLS " + std::string(what) + " " + path + ": " +
                                   OpenSslReason(ec));
  return Status::Ok();
}

Status LoadOwn(ssl::context& ctx, const TlsFiles& f) {
  if (Status s = LoadFile("certificate", f.cert_file,
                          [&](auto& ec) { ctx.use_certificate_chain_file(f.cert_file, ec); });
      !s.ok())
    return s;
  if (Status s =
          LoadFile("key", f.key_file,
                   [&](auto& ec) { ctx.use_private_key_file(f.key_file, ssl::context::pem, ec); });
      !s.ok())
    return s;
  if (SSL_CTX_check_private_key(ctx.native_handle()) != 1) {
    ERR_clear_error();
    return Status::InvalidArgument("TLS key " + f.key_file + " does not match certificate " +
                                   f.cert_file);
  }
  return Status::Ok();
}

}  // namespace

Result<std::shared_ptr<ssl::context>> MakeServerTlsContext(const TlsFiles& f) {
  if (f.cert_file.empty() || f.key_file.empty() || f.ca_file.empty())
    return Status::InvalidArgument(
        "TLS needs the server's certificate, its key and the CA that signs client certificates");
  auto ctx = std::make_shared<ssl::context>(ssl::context::tls_server);
  if (Status s = Profile(*ctx); !s.ok()) return s;
  if (Status s = LoadOwn(*ctx, f); !s.ok()) return s;
  if (Status s =
          LoadFile("client CA", f.ca_file, [&](auto& ec) { ctx->load_verify_file(f.ca_file, ec); });
      !s.ok())
    return s;
  SSL_CTX* h = ctx->native_handle();
  // The CertificateRequest names the accepted CAs, so a client with several certificates picks.
  if (STACK_OF(X509_NAME)* names = SSL_load_client_CA_file(f.ca_file.c_str()))
    SSL_CTX_set_client_CA_list(h, names);
  ctx->set_verify_mode(ssl::verify_peer | ssl::verify_fail_if_no_peer_cert);
  static const unsigned char kContext[] = "sightfix";
  SSL_CTX_set_session_id_context(h, kContext, sizeof kContext - 1);
  // Tickets (stateless, their key this context's: a reload's new context makes every older
  // ticket a full handshake again) live as long as a connection may (max_connection_age_s's
  // default); each resumption is verified again (VerifyResumedPeer).
  SSL_CTX_set_timeout(h, 3600);
  SSL_CTX_set_alpn_select_cb(h, SelectAlpn, nullptr);
  return ctx;
}

namespace {

// Every certificate (or CRL) of a PEM file, through `read` (PEM_read_X509 or PEM_read_X509_CRL).
template <typename T, typename Read, typename Free>
std::vector<std::shared_ptr<T>> ReadAllPem(const std::string& path, Read read, Free free_fn) {
  std::vector<std::shared_ptr<T>> out;
  FILE* f = std::fopen(path.c_str(), "r");
  if (f == nullptr) return out;
  while (T* item = read(f, nullptr, nullptr, nullptr)) out.emplace_back(item, free_fn);
  std::fclose(f);
  ERR_clear_error();  // the end of the file reads as an error
  return out;
}

std::string NameOf(X509_NAME* name) {
  char buf[256] = {0};
  X509_NAME_oneline(name, buf, sizeof buf);
  return buf;
}

}  // namespace

bool CrlSet::Revokes(X509* cert) const {
  for (const auto& crl : crls) {
    X509_REVOKED* entry = nullptr;
    if (X509_CRL_get0_by_cert(crl.get(), &entry, cert) == 1) return true;
  }
  return false;
}

Result<std::shared_ptr<const CrlSet>> AddCrl(ssl::context* ctx, const std::string& crl_file,
                                             const std::string& ca_file, int64_t grace_s) {
  auto set = std::make_shared<CrlSet>();
  set->crls = ReadAllPem<X509_CRL>(crl_file, PEM_read_X509_CRL, X509_CRL_free);
  if (set->crls.empty())
    return Status::InvalidArgument("TLS CRL " + crl_file + ": no CRL could be read from it");
  const auto cas = ReadAllPem<X509>(ca_file, PEM_read_X509, X509_free);
  for (const auto& ca : cas) {
    bool covered = false;
    for (const auto& crl : set->crls)
      covered = covered ||
                X509_NAME_cmp(X509_CRL_get_issuer(crl.get()), X509_get_subject_name(ca.get())) == 0;
    if (!covered)
      return Status::InvalidArgument("TLS CRL " + crl_file + " has no CRL of client CA " +
                                     NameOf(X509_get_subject_name(ca.get())) +
                                     ": every client CA needs its CRL");
  }
  X509_STORE* store = SSL_CTX_get_cert_store(ctx->native_handle());
  set->next_update_unix = INT64_MAX;
  for (const auto& crl : set->crls) {
    bool signed_by_ca = false;
    for (const auto& ca : cas) {
      if (X509_NAME_cmp(X509_CRL_get_issuer(crl.get()), X509_get_subject_name(ca.get())) != 0)
        continue;
      EVP_PKEY* key = X509_get0_pubkey(ca.get());
      signed_by_ca = signed_by_ca || (key && X509_CRL_verify(crl.get(), key) == 1);
    }
    ERR_clear_error();
    if (!signed_by_ca)
      return Status::InvalidArgument("TLS CRL " + crl_file + ": the CRL of " +
                                     NameOf(X509_CRL_get_issuer(crl.get())) +
                                     " is not signed by a client CA");
    const ASN1_TIME* next = X509_CRL_get0_nextUpdate(crl.get());
    struct tm t {};
    if (next == nullptr || ASN1_TIME_to_tm(next, &t) != 1)
      return Status::InvalidArgument("TLS CRL " + crl_file + ": a CRL without nextUpdate");
    set->next_update_unix = std::min<int64_t>(set->next_update_unix, timegm(&t));
    if (X509_STORE_add_crl(store, crl.get()) != 1) {
      ERR_clear_error();
      return Status::Internal("TLS: cannot add the CRL to the certificate store");
    }
  }
  X509_STORE_set_flags(store, X509_V_FLAG_CRL_CHECK);
  const int64_t accept_expired_until = set->next_update_unix + grace_s;
  ctx->set_verify_callback([accept_expired_until](bool preverified, ssl::verify_context& vc) {
    if (preverified) return true;
    return X509_STORE_CTX_get_error(vc.native_handle()) == X509_V_ERR_CRL_HAS_EXPIRED &&
           static_cast<int64_t>(std::time(nullptr)) < accept_expired_until;
  });
  return std::shared_ptr<const CrlSet>(set);
}

Result<std::shared_ptr<ssl::context>> MakeClientTlsContext(const TlsFiles& f) {
  if (f.ca_file.empty())
    return Status::InvalidArgument("TLS needs the CA bundle that signs the server's certificate");
  if (f.cert_file.empty() != f.key_file.empty())
    return Status::InvalidArgument("TLS: give the client certificate and its key together");
  auto ctx = std::make_shared<ssl::context>(ssl::context::tls_client);
  if (Status s = Profile(*ctx); !s.ok()) return s;
  if (Status s =
          LoadFile("CA bundle", f.ca_file, [&](auto& ec) { ctx->load_verify_file(f.ca_file, ec); });
      !s.ok())
    return s;
  if (!f.cert_file.empty())
    if (Status s = LoadOwn(*ctx, f); !s.ok()) return s;
  ctx->set_verify_mode(ssl::verify_peer);
  const std::string& alpn = AlpnWire();
  if (SSL_CTX_set_alpn_protos(ctx->native_handle(),
                              reinterpret_cast<const unsigned char*>(alpn.data()),
                              static_cast<unsigned>(alpn.size())) != 0)
    return Status::Internal("TLS: cannot set ALPN");
  return ctx;
}

Status SetClientServerName(SSL* ssl, const std::string& name) {
  if (name.empty()) return Status::InvalidArgument("TLS needs the server's name to check");
  boost::system::error_code ec;
  boost::asio::ip::make_address(name, ec);
  const bool ip = !ec;
  X509_VERIFY_PARAM* param = SSL_get0_param(ssl);
  const int ok = ip ? X509_VERIFY_PARAM_set1_ip_asc(param, name.c_str())
                    : (SSL_set_tlsext_host_name(ssl, name.c_str()) == 1 &&
                       SSL_set1_host(ssl, name.c_str()) == 1);
  if (ok != 1) {
    ERR_clear_error();
    return Status::InvalidArgument("TLS: '" + name + "' is not a usable server name");
  }
  return Status::Ok();
}

std::string AlpnProblem(SSL* ssl) {
  const unsigned char* p = nullptr;
  unsigned int n = 0;
  SSL_get0_alpn_selected(ssl, &p, &n);
  if (n == 0)
    return std::string("the peer agreed on no application protocol (ALPN ") + kWireAlpn +
           " expected)";
  const std::string got(reinterpret_cast<const char*>(p), n);
  if (got != kWireAlpn) return "the peer chose ALPN '" + got + "', not " + kWireAlpn;
  return "";
}

std::string VerifyProblem(SSL* ssl) {
  const long result = SSL_get_verify_result(ssl);
  return result == X509_V_OK ? "" : X509_verify_cert_error_string(result);
}

namespace {

// AddCrl's policy for an expired CRL, in a verification the server runs itself.
int GraceVerify(int preverified, X509_STORE_CTX* vc) {
  if (preverified) return 1;
  const auto* until = static_cast<const int64_t*>(X509_STORE_CTX_get_app_data(vc));
  return X509_STORE_CTX_get_error(vc) == X509_V_ERR_CRL_HAS_EXPIRED && until != nullptr &&
         static_cast<int64_t>(std::time(nullptr)) < *until;
}

}  // namespace

std::string VerifyResumedPeer(SSL* ssl, int64_t crl_grace_until_unix) {
  X509* cert = SSL_get0_peer_certificate(ssl);
  if (cert == nullptr) return "the resumed session holds no client certificate";
  std::unique_ptr<X509_STORE_CTX, void (*)(X509_STORE_CTX*)> vc(X509_STORE_CTX_new(),
                                                                X509_STORE_CTX_free);
  if (!vc || X509_STORE_CTX_init(vc.get(), SSL_CTX_get_cert_store(SSL_get_SSL_CTX(ssl)), cert,
                                 nullptr) != 1) {
    ERR_clear_error();
    return "cannot check the client certificate again";
  }
  X509_STORE_CTX_set_default(vc.get(), "ssl_client");
  X509_STORE_CTX_set_app_data(vc.get(), &crl_grace_until_unix);
  X509_STORE_CTX_set_verify_cb(vc.get(), GraceVerify);
  const bool ok = X509_verify_cert(vc.get()) == 1;
  const int err = X509_STORE_CTX_get_error(vc.get());
  ERR_clear_error();
  return ok ? "" : X509_verify_cert_error_string(err);
}

namespace {

// A connection's ticket filing: the cache and the server the tickets belong to (SSL ex data,
// freed with the SSL).
struct TicketFiling {
  std::shared_ptr<TlsSessionCache> cache;
  std::string server;
};

void FreeFiling(void*, void* p, CRYPTO_EX_DATA*, int, long, void*) {
  delete static_cast<TicketFiling*>(p);
}

int FilingIndex() {
  static const int index = SSL_get_ex_new_index(0, nullptr, nullptr, nullptr, FreeFiling);
  return index;
}

int OnNewSession(SSL* ssl, SSL_SESSION* session) {
  auto* filing = static_cast<TicketFiling*>(SSL_get_ex_data(ssl, FilingIndex()));
  if (filing == nullptr || !SSL_SESSION_is_resumable(session)) return 0;
  filing->cache->Keep(filing->server, session);
  return 1;  // the cache owns the reference now
}

}  // namespace

std::shared_ptr<TlsSessionCache> TlsSessionCache::Install(ssl::context* ctx) {
  auto cache = std::make_shared<TlsSessionCache>();
  SSL_CTX* h = ctx->native_handle();
  SSL_CTX_set_session_cache_mode(h, SSL_SESS_CACHE_CLIENT | SSL_SESS_CACHE_NO_INTERNAL_STORE);
  SSL_CTX_sess_set_new_cb(h, OnNewSession);
  return cache;
}

void TlsSessionCache::Prepare(SSL* ssl, const std::string& server) {
  std::shared_ptr<SSL_SESSION> offered;
  {
    std::lock_guard<std::mutex> lock(mu_);
    auto it = sessions_.find(server);
    if (it != sessions_.end()) {
      offered = it->second;
      sessions_.erase(it);
    }
  }
  if (offered) SSL_set_session(ssl, offered.get());  // takes its own reference
  SSL_set_ex_data(ssl, FilingIndex(), new TicketFiling{shared_from_this(), server});
}

size_t TlsSessionCache::size() const {
  std::lock_guard<std::mutex> lock(mu_);
  return sessions_.size();
}

void TlsSessionCache::Forget(const std::string& server) {
  std::lock_guard<std::mutex> lock(mu_);
  sessions_.erase(server);
}

void TlsSessionCache::Keep(const std::string& server, SSL_SESSION* session) {
  std::lock_guard<std::mutex> lock(mu_);
  sessions_[server] = std::shared_ptr<SSL_SESSION>(session, SSL_SESSION_free);
}

void SetVerifyTime(SSL* ssl, int64_t unix_s) {
  X509_VERIFY_PARAM_set_time(SSL_get0_param(ssl), static_cast<time_t>(unix_s));
}

std::string PeerCommonName(SSL* ssl) {
  X509* cert = SSL_get0_peer_certificate(ssl);
  if (cert == nullptr) return "";
  char cn[256] = {0};
  if (X509_NAME_get_text_by_NID(X509_get_subject_name(cert), NID_commonName, cn, sizeof cn) < 0)
    return "";
  return cn;
}

Result<std::shared_ptr<ssl::context>> MakeMonitoringTlsContext(const TlsFiles& f) {
  Result<std::shared_ptr<ssl::context>> ctx = MakeServerTlsContext(f);
  if (!ctx.ok()) return ctx;
  SSL_CTX* h = (*ctx)->native_handle();
  SSL_CTX_set_alpn_select_cb(h, nullptr, nullptr);  // no ALPN required, none chosen
  SSL_CTX_set_num_tickets(h, 0);                    // no resumption: each check in full
  return ctx;
}

}  // namespace sightfix
