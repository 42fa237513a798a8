// Call the Lagsight service from Java 11+ with java.net.http (no dependencies).
//
//   java LagsightClient.java single demo_payloads/bakery_daily_residuals.json
//   java LagsightClient.java batch  demo_payloads/retail_weekly_batch_500.json
//
// (Java 11+ runs a single source file directly; or javac LagsightClient.java && java LagsightClient ...)
// Environment: LAGSIGHT_URL (default http://127.0.0.1:8000), LAGSIGHT_TIMEOUT in seconds (default 30),
// LAGSIGHT_TOKEN (bearer token, only where the deployment requires one).
// Exit codes: 0 answered, 2 the service refused the request (problem details printed), 3 no answer.
// The small JSON reader at the end keeps the example free of libraries; in an application use your JSON library.

import java.io.IOException;
import java.net.URI;
import java.net.http.HttpClient;
import java.net.http.HttpRequest;
import java.net.http.HttpResponse;
import java.net.http.HttpTimeoutException;
import java.nio.file.Files;
import java.nio.file.Path;
import java.time.Duration;
import java.util.ArrayList;
import java.util.LinkedHashMap;
import java.util.List;
import java.util.Map;
import java.util.StringJoiner;

public final class LagsightClient {

    /** The service answered with an error; {@code problem} holds its problem details (RFC 9457). */
    public static final class LagsightException extends Exception {
        private static final long serialVersionUID = 1L;
        public final transient Map<String, Object> problem;

        LagsightException(Map<String, Object> problem) {
            super(problem.get("status") + " " + problem.get("title") + ": " + problem.get("detail"));
            this.problem = problem;
        }
    }

    private final String baseUrl;
    private final Duration timeout;
    private final String token;
    private final HttpClient http;

    public LagsightClient(String baseUrl, Duration timeout, String token) {
        this.baseUrl = baseUrl.replaceAll("/+$", "");
        this.timeout = timeout;
        this.token = token;
        this.http = HttpClient.newBuilder().connectTimeout(timeout).build();
    }

    /** POST a JSON body to a route ("/v1/diagnostics" or "/v1/diagnostics/batch") and parse the answer. */
    @SuppressWarnings("unchecked")
    public Map<String, Object> post(String route, String jsonBody)
            throws IOException, InterruptedException, LagsightException {
        HttpRequest.Builder request = HttpRequest.newBuilder(URI.create(baseUrl + route))
                .timeout(timeout) // the whole exchange; HttpClient waits forever without it
                .header("Content-Type", "application/json")
                .header("Accept", "application/json")
                .POST(HttpRequest.BodyPublishers.ofString(jsonBody));
        if (token != null && !token.isEmpty()) {
            request.header("Authorization", "Bearer " + token);
        }
        HttpResponse<String> response = http.send(request.build(), HttpResponse.BodyHandlers.ofString());
        String type = response.headers().firstValue("Content-Type").orElse("");
        if (type.startsWith("application/problem+json")) {
            throw new LagsightException((Map<String, Object>) Json.parse(response.body()));
        }
        if (response.statusCode() / 100 != 2) {
            Map<String, Object> p = new LinkedHashMap<>();
            p.put("status", response.statusCode());
            p.put("title", "HTTP error");
            p.put("detail", response.body().substring(0, Math.min(200, response.body().length())));
            throw new LagsightException(p);
        }
        return (Map<String, Object>) Json.parse(response.body());
    }

    static String word(Object whiteNoise) {
        if (Boolean.TRUE.equals(whiteNoise)) return "white noise";
        if (Boolean.FALSE.equals(whiteNoise)) return "not white noise";
        return "no judgement";
    }

    static String lags(Object list) {
        List<?> items = (List<?>) list;
        if (items.isEmpty()) return "none";
        StringJoiner joined = new StringJoiner(", ");
        for (Object lag : items) joined.add(Json.number(lag));
        return joined.toString();
    }

    @SuppressWarnings("unchecked")
    static Map<String, Object> map(Object o, String key) {
        return (Map<String, Object>) ((Map<String, Object>) o).get(key);
    }

    static void printReport(Map<String, Object> r) {
        Object name = r.get("name");
        System.out.println(name == null ? "(unnamed)" : name);
        System.out.println("verdict: " + word(map(r, "verdict").get("white_noise")));
        System.out.println("summary: " + map(r, "verdict").get("summary"));
        System.out.println("outside the band (ACF): " + lags(map(r, "acf").get("outside")));
        System.out.println("outside the band (PACF): " + lags(map(r, "pacf").get("outside")));
    }

    @SuppressWarnings("unchecked")
    static void printBatch(Map<String, Object> answer) {
        StringBuilder out = new StringBuilder();
        for (Object item : (List<Object>) answer.get("results")) {
            Map<String, Object> r = (Map<String, Object>) item;
            String id = Json.number(r.get("id"));
            Map<String, Object> error = (Map<String, Object>) r.get("error");
            if (error != null) {
                out.append(id).append(": error ").append(Json.number(error.get("status"))).append(": ")
                        .append(error.get("detail")).append('\n');
            } else {
                out.append(id).append(": ").append(word(map(r, "verdict").get("white_noise")))
                        .append("; ACF outside: ").append(lags(map(r, "acf").get("outside"))).append('\n');
            }
        }
        Map<String, Object> s = map(answer, "summary");
        out.append("summary: ").append(Json.number(s.get("white_noise"))).append(" white noise, ")
                .append(Json.number(s.get("not_white_noise"))).append(" not white noise, ")
                .append(Json.number(s.get("undetermined"))).append(" undetermined, ")
                .append(Json.number(s.get("errors")))
                .append(Json.number(s.get("errors")).equals("1") ? " error" : " errors");
        System.out.println(out);
    }

    @SuppressWarnings("unchecked")
    public static void main(String[] args) throws Exception {
        if (args.length != 2 || !(args[0].equals("single") || args[0].equals("batch"))) {
            System.err.println("usage: java LagsightClient.java single|batch PAYLOAD.json");
            System.exit(64);
        }
        boolean batch = args[0].equals("batch");
        String body = Files.readString(Path.of(args[1]));
        String base = System.getenv().getOrDefault("LAGSIGHT_URL", "http://127.0.0.1:8000");
        double seconds = Double.parseDouble(System.getenv().getOrDefault("LAGSIGHT_TIMEOUT", "30"));
        LagsightClient client = new LagsightClient(base, Duration.ofMillis((long) (seconds * 1000)),
                System.getenv("LAGSIGHT_TOKEN"));
        try {
            Map<String, Object> answer = client.post(batch ? "/v1/diagnostics/batch" : "/v1/diagnostics", body);
            if (batch) printBatch(answer); else printReport(answer);
        } catch (LagsightException e) {
            Map<String, Object> p = e.problem;
            System.err.println("error " + Json.number(p.get("status")) + " (" + p.get("title") + "): " + p.get("detail"));
            Object errors = p.get("errors");
            if (errors != null) {
                for (Object item : (List<Object>) errors) {
                    Map<String, Object> fieldError = (Map<String, Object>) item;
                    System.err.println("  " + fieldError.get("pointer") + ": " + fieldError.get("detail"));
                }
            }
            System.exit(2);
        } catch (HttpTimeoutException e) {
            System.err.println("error: no answer from " + base + " within " + Json.number(seconds) + " s");
            System.exit(3);
        } catch (IOException e) {
            System.err.println("error: could not reach " + base + ": " + e);
            System.exit(3);
        }
    }

    /** A minimal JSON reader: objects become LinkedHashMap, arrays ArrayList, numbers Double. */
    static final class Json {
        private final String s;
        private int i;

        private Json(String s) {
            this.s = s;
        }

        static Object parse(String text) {
            Json p = new Json(text);
            Object value = p.value();
            p.space();
            if (p.i != p.s.length()) throw p.error("trailing characters");
            return value;
        }

        /** A number as a caller would write it: 17 rather than 17.0. */
        static String number(Object o) {
            if (o instanceof Double && ((Double) o) == Math.rint((Double) o) && !((Double) o).isInfinite()) {
                return Long.toString(((Double) o).longValue());
            }
            return String.valueOf(o);
        }

        private IllegalArgumentException error(String what) {
            return new IllegalArgumentException("JSON: " + what + " at offset " + i);
        }

        private void space() {
            while (i < s.length() && Character.isWhitespace(s.charAt(i))) i++;
        }

        private Object value() {
            space();
            if (i >= s.length()) throw error("unexpected end");
            char c = s.charAt(i);
            switch (c) {
                case '{': return object();
                case '[': return array();
                case '"': return string();
                case 't': return literal("true", Boolean.TRUE);
                case 'f': return literal("false", Boolean.FALSE);
                case 'n': return literal("null", null);
                default: return numberValue();
            }
        }

        private Object literal(String word, Object result) {
            if (!s.startsWith(word, i)) throw error("unexpected token");
            i += word.length();
            return result;
        }

        private Map<String, Object> object() {
            Map<String, Object> out = new LinkedHashMap<>();
            i++;
            space();
            if (s.charAt(i) == '}') { i++; return out; }
            while (true) {
                space();
                String key = string();
                space();
                if (s.charAt(i++) != ':') throw error("expected ':'");
                out.put(key, value());
                space();
                char c = s.charAt(i++);
                if (c == '}') return out;
                if (c != ',') throw error("expected ',' or '}'");
            }
        }

        private List<Object> array() {
            List<Object> out = new ArrayList<>();
            i++;
            space();
            if (s.charAt(i) == ']') { i++; return out; }
            while (true) {
                out.add(value());
                space();
                char c = s.charAt(i++);
                if (c == ']') return out;
                if (c != ',') throw error("expected ',' or ']'");
            }
        }

        private String string() {
            if (s.charAt(i) != '"') throw error("expected a string");
            StringBuilder out = new StringBuilder();
            i++;
            while (true) {
                char c = s.charAt(i++);
                if (c == '"') return out.toString();
                if (c != '\\') { out.append(c); continue; }
                char e = s.charAt(i++);
                switch (e) {
                    case 'n': out.append('\n'); break;
                    case 't': out.append('\t'); break;
                    case 'r': out.append('\r'); break;
                    case 'b': out.append('\b'); break;
                    case 'f': out.append('\f'); break;
                    case 'u': out.append((char) Integer.parseInt(s.substring(i, i + 4), 16)); i += 4; break;
                    default: out.append(e); // \" \\ \/
                }
            }
        }

        private Double numberValue() {
            int start = i;
            while (i < s.length() && "+-0123456789.eE".indexOf(s.charAt(i)) >= 0) i++;
            if (start == i) throw error("unexpected character");
            return Double.valueOf(s.substring(start, i));
        }
    }
}
