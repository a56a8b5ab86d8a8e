package attribute

import (
	"testing"

	"github.com/culprithq/culprit/traces"
)

// ruleAudit gives every built-in rule, by its pattern, real names it must
// decide (the first matching built-in rule must be this one) and real
// names it must not match.
//
// Where the names come from:
//   - Go standard library: the function and method names defined in Go
//     1.26's net/http (client.go: Client.Do, Get, Head, Post, PostForm;
//     header.go: Header.Clone, Header.Set; server.go) and runtime; read
//     in GOROOT.
//   - gRPC-Go: google.golang.org/grpc v1.85.0 as read in the module cache
//     (call.go: ClientConn.Invoke, Invoke, invoke; stream.go: NewStream,
//     NewClientStream, newClientStream, newClientStreamWithParams,
//     clientStream and serverStream methods; server.go).
//   - modernc.org/sqlite: its conn.query, as the real profile test in
//     realprofile_test.go records it.
//   - Every other library: names as the library's source defines them
//     (exported API and the unexported functions its stack frames show),
//     recalled from memory of those sources, not read here. Python and
//     Node.js rules match file paths: the paths are where pip and npm
//     install those packages.
//   - Invented on purpose: the negatives that extend a pattern's last
//     identifier by a letter (mysqlx, postgresqlx, hibernatex, jooqx,
//     mongodbx, java.sqlx, feignx, restyx, amqp091-gox, ServeHTTPx,
//     doDispatchX, HttpClientImplX, HttpURLConnectionX, django/dbx,
//     sqlite3_helper.py) probe the identifier boundary; they name no real
//     package.
var ruleAudit = map[string]struct{ match, not []string }{
	// Go: databases.
	"github.com/jackc/pgx":                           {[]string{"github.com/jackc/pgx/v5.(*Conn).Query", "github.com/jackc/pgx/v5/pgxpool.(*Pool).Query", "github.com/jackc/pgx/v5/pgconn.(*PgConn).Exec", "github.com/jackc/pgx.(*Conn).Query"}, []string{"github.com/jackc/pgxlisten.(*Listener).Listen", "github.com/jackc/puddle/v2.(*Pool[...]).Acquire"}},
	"github.com/lib/pq.":                             {[]string{"github.com/lib/pq.(*conn).query", "github.com/lib/pq.(*stmt).exec"}, []string{"github.com/lib/pq/oid.init"}},
	"github.com/go-sql-driver/mysql.":                {[]string{"github.com/go-sql-driver/mysql.(*mysqlConn).readPacket", "github.com/go-sql-driver/mysql.(*mysqlConn).Query"}, []string{"github.com/go-sql-driver/mysqlx.Open"}},
	"modernc.org/sqlite.":                            {[]string{"modernc.org/sqlite.(*conn).query", "modernc.org/sqlite.(*stmt).query"}, []string{"modernc.org/sqlite/lib.Xsqlite3_step", "modernc.org/libc.(*TLS).Alloc"}},
	"github.com/mattn/go-sqlite3.":                   {[]string{"github.com/mattn/go-sqlite3.(*SQLiteConn).query", "github.com/mattn/go-sqlite3.(*SQLiteStmt).exec"}, []string{"github.com/mattn/go-isatty.IsTerminal"}},
	"github.com/redis/go-redis/":                     {[]string{"github.com/redis/go-redis/v9.(*baseClient).process", "github.com/redis/go-redis/v9.(*Client).Get"}, []string{"github.com/redis/rueidis.(*singleClient).Do"}},
	"github.com/go-redis/redis":                      {[]string{"github.com/go-redis/redis/v8.(*baseClient).process", "github.com/go-redis/redis.(*Client).Process"}, []string{"github.com/go-redis/redismock/v8.NewClientMock", "github.com/go-redis/redis_rate/v10.(*Limiter).Allow"}},
	"github.com/gomodule/redigo/":                    {[]string{"github.com/gomodule/redigo/redis.(*conn).Do"}, []string{"github.com/gomodule/oauth1/oauth.(*Client).Get"}},
	"go.mongodb.org/mongo-driver/":                   {[]string{"go.mongodb.org/mongo-driver/mongo.(*Collection).Find", "go.mongodb.org/mongo-driver/v2/mongo.(*Collection).FindOne"}, []string{"go.mongodb.org/atlas/mongodbatlas.(*Client).Do"}},
	"github.com/gocql/gocql.":                        {[]string{"github.com/gocql/gocql.(*Query).Iter", "github.com/gocql/gocql.(*Session).executeQuery"}, []string{"github.com/scylladb/gocqlx/v2.(*Queryx).Select"}},
	"github.com/bradfitz/gomemcache/":                {[]string{"github.com/bradfitz/gomemcache/memcache.(*Client).Get"}, []string{"github.com/bradfitz/iter.N"}},
	"github.com/elastic/go-elasticsearch/":           {[]string{"github.com/elastic/go-elasticsearch/v8.(*BaseClient).Perform"}, []string{"github.com/elastic/elastic-transport-go/v8/elastictransport.(*Client).Perform"}},
	"cloud.google.com/go/spanner.":                   {[]string{"cloud.google.com/go/spanner.(*ReadOnlyTransaction).Query", "cloud.google.com/go/spanner.(*Client).Apply"}, []string{"cloud.google.com/go/spanner/admin/database/apiv1.(*DatabaseAdminClient).GetDatabase"}},
	"github.com/aws/aws-sdk-go-v2/service/dynamodb.": {[]string{"github.com/aws/aws-sdk-go-v2/service/dynamodb.(*Client).GetItem", "github.com/aws/aws-sdk-go-v2/service/dynamodb.(*Client).Query"}, []string{"github.com/aws/aws-sdk-go-v2/service/dynamodbstreams.(*Client).GetRecords"}},
	"gorm.io/gorm.":                                  {[]string{"gorm.io/gorm.(*DB).First", "gorm.io/gorm.(*processor).Execute"}, []string{"gorm.io/driver/postgres.Open", "gorm.io/gorm/logger.(*logger).Trace"}},
	"github.com/jmoiron/sqlx.":                       {[]string{"github.com/jmoiron/sqlx.(*DB).Select", "github.com/jmoiron/sqlx.(*DB).Get"}, []string{"github.com/jmoiron/sqlx/reflectx.(*Mapper).TraversalsByName"}},
	"entgo.io/ent":                                   {[]string{"entgo.io/ent/dialect/sql.(*Driver).Query", "entgo.io/ent/dialect/sql.(*Conn).Exec"}, []string{"entgo.io/contrib/entgql.(*Pagination).Paginate"}},
	"github.com/uptrace/bun.":                        {[]string{"github.com/uptrace/bun.(*SelectQuery).Scan", "github.com/uptrace/bun.(*DB).QueryContext"}, []string{"github.com/uptrace/bunrouter.(*Router).ServeHTTP"}},
	"database/sql.":                                  {[]string{"database/sql.(*DB).QueryContext", "database/sql.(*Rows).Next", "database/sql.(*DB).conn"}, []string{"database/sql/driver.IsValue"}},
	// Go: outbound calls.
	"net/http.(*Client).":                              {[]string{"net/http.(*Client).Do", "net/http.(*Client).do", "net/http.(*Client).Get"}, []string{"net/http.(*conn).serve", "net/http.(*response).WriteHeader"}},
	"net/http.(*Transport).":                           {[]string{"net/http.(*Transport).roundTrip", "net/http.(*Transport).RoundTrip"}, []string{"net/http.(*transportRequest).setError", "net/http.(*http2Transport).RoundTrip"}},
	"net/http.Get":                                     {[]string{"net/http.Get"}, []string{"net/http.(*Client).Get", "net/http.Header.Get"}},
	"net/http.Post":                                    {[]string{"net/http.Post"}, []string{"net/http.PostForm", "net/http.(*Request).PostFormValue"}},
	"net/http.PostForm":                                {[]string{"net/http.PostForm"}, []string{"net/http.(*Request).PostFormValue", "net/http.Post"}},
	"net/http.Head":                                    {[]string{"net/http.Head"}, []string{"net/http.Header.Set", "net/http.Header.Clone", "net/http.Header.writeSubset", "net/http.(*Client).Head"}},
	"github.com/go-resty/resty/":                       {[]string{"github.com/go-resty/resty/v2.(*Request).Execute", "github.com/go-resty/resty/v2.(*Client).execute"}, []string{"github.com/go-resty/restyx.New"}},
	"github.com/hashicorp/go-retryablehttp.":           {[]string{"github.com/hashicorp/go-retryablehttp.(*Client).Do"}, []string{"github.com/hashicorp/go-cleanhttp.DefaultClient"}},
	"google.golang.org/grpc.(*ClientConn).Invoke":      {[]string{"google.golang.org/grpc.(*ClientConn).Invoke"}, []string{"google.golang.org/grpc.(*ClientConn).Close", "google.golang.org/grpc.invoke"}},
	"google.golang.org/grpc.Invoke":                    {[]string{"google.golang.org/grpc.Invoke"}, []string{"google.golang.org/grpc.invoke"}},
	"google.golang.org/grpc.(*ClientConn).NewStream":   {[]string{"google.golang.org/grpc.(*ClientConn).NewStream"}, []string{"google.golang.org/grpc.(*ClientConn).Connect"}},
	"google.golang.org/grpc.NewClientStream":           {[]string{"google.golang.org/grpc.NewClientStream"}, []string{"google.golang.org/grpc.newClientStream"}},
	"google.golang.org/grpc.newClientStream":           {[]string{"google.golang.org/grpc.newClientStream", "google.golang.org/grpc.newClientStream.func2"}, []string{"google.golang.org/grpc.newClientStreamWithParams", "google.golang.org/grpc.NewClientStream"}},
	"google.golang.org/grpc.newClientStreamWithParams": {[]string{"google.golang.org/grpc.newClientStreamWithParams", "google.golang.org/grpc.newClientStreamWithParams.func1"}, []string{"google.golang.org/grpc.newClientStream"}},
	"google.golang.org/grpc.(*clientStream).":          {[]string{"google.golang.org/grpc.(*clientStream).RecvMsg", "google.golang.org/grpc.(*clientStream).SendMsg"}, []string{"google.golang.org/grpc.(*serverStream).RecvMsg"}},
	"github.com/aws/aws-sdk-go-v2/":                    {[]string{"github.com/aws/aws-sdk-go-v2/service/s3.(*Client).GetObject", "github.com/aws/aws-sdk-go-v2/aws/retry.(*Attempt).HandleFinalize"}, []string{"github.com/aws/smithy-go/middleware.(*Stack).HandleMiddleware"}},
	"github.com/aws/aws-sdk-go/":                       {[]string{"github.com/aws/aws-sdk-go/aws/request.(*Request).Send", "github.com/aws/aws-sdk-go/service/s3.(*S3).GetObject"}, []string{"github.com/aws/aws-lambda-go/lambda.Start"}},
	"cloud.google.com/go/":                             {[]string{"cloud.google.com/go/storage.(*Reader).Read", "cloud.google.com/go/pubsub.(*Topic).Publish"}, []string{"cloud.google.com/go.init"}},
	"github.com/Azure/azure-sdk-for-go/":               {[]string{"github.com/Azure/azure-sdk-for-go/sdk/storage/azblob.(*Client).DownloadStream"}, []string{"github.com/Azure/go-autorest/autorest.Send"}},
	"github.com/segmentio/kafka-go.":                   {[]string{"github.com/segmentio/kafka-go.(*Writer).WriteMessages", "github.com/segmentio/kafka-go.(*Reader).FetchMessage"}, []string{"github.com/segmentio/kafka-go/compress.(*Codec).NewReader"}},
	"github.com/IBM/sarama.":                           {[]string{"github.com/IBM/sarama.(*syncProducer).SendMessage"}, []string{"github.com/IBM/sarama/mocks.(*SyncProducer).SendMessage"}},
	"github.com/Shopify/sarama.":                       {[]string{"github.com/Shopify/sarama.(*syncProducer).SendMessage"}, []string{"github.com/Shopify/toxiproxy/v2.(*Proxy).Start"}},
	"github.com/nats-io/nats.go.":                      {[]string{"github.com/nats-io/nats.go.(*Conn).Request", "github.com/nats-io/nats.go.(*Conn).Publish"}, []string{"github.com/nats-io/nats.go/jetstream.(*jetStream).Publish"}},
	"github.com/rabbitmq/amqp091-go.":                  {[]string{"github.com/rabbitmq/amqp091-go.(*Channel).PublishWithContext"}, []string{"github.com/rabbitmq/amqp091-gox.Dial"}},
	// Go: request entry points.
	"net/http.HandlerFunc.ServeHTTP":                       {[]string{"net/http.HandlerFunc.ServeHTTP"}, []string{"net/http.Handler.ServeHTTP", "net/http.HandlerFunc.ServeHTTPx"}},
	"net/http.(*ServeMux).ServeHTTP":                       {[]string{"net/http.(*ServeMux).ServeHTTP"}, []string{"net/http.(*ServeMux).Handle"}},
	"net/http.serverHandler.ServeHTTP":                     {[]string{"net/http.serverHandler.ServeHTTP"}, []string{"net/http.(*Server).Serve"}},
	"net/http.(*conn).serve":                               {[]string{"net/http.(*conn).serve", "net/http.(*conn).serve.func1"}, []string{"net/http.(*conn).serverHandler", "net/http.(*conn).setState"}},
	"google.golang.org/grpc.(*Server).processUnaryRPC":     {[]string{"google.golang.org/grpc.(*Server).processUnaryRPC"}, []string{"google.golang.org/grpc.(*Server).Serve"}},
	"google.golang.org/grpc.(*Server).processStreamingRPC": {[]string{"google.golang.org/grpc.(*Server).processStreamingRPC"}, []string{"google.golang.org/grpc.(*Server).Stop"}},
	"google.golang.org/grpc.(*Server).handleStream":        {[]string{"google.golang.org/grpc.(*Server).handleStream"}, []string{"google.golang.org/grpc.(*Server).handleRawConn"}},
	"github.com/gin-gonic/gin.(*Context).Next":             {[]string{"github.com/gin-gonic/gin.(*Context).Next"}, []string{"github.com/gin-gonic/gin.(*Context).JSON"}},
	"github.com/labstack/echo/v4.(*Echo).ServeHTTP":        {[]string{"github.com/labstack/echo/v4.(*Echo).ServeHTTP"}, []string{"github.com/labstack/echo/v4.(*Echo).Start"}},
	"github.com/go-chi/chi/v5.(*Mux).routeHTTP":            {[]string{"github.com/go-chi/chi/v5.(*Mux).routeHTTP"}, []string{"github.com/go-chi/chi/v5.(*Mux).ServeHTTP"}},
	"main.main":    {[]string{"main.main", "main.main.func1"}, []string{"main.mainLoop", "main.(*server).main"}},
	"runtime.main": {[]string{"runtime.main"}, []string{"runtime.mainStarted", "runtime.mallocgc"}},
	// JVM.
	"org.postgresql.":                             {[]string{"org.postgresql.jdbc.PgPreparedStatement.executeQuery"}, []string{"org.postgresqlx.Driver.connect"}},
	"com.mysql.cj.":                               {[]string{"com.mysql.cj.jdbc.ClientPreparedStatement.executeQuery"}, []string{"com.mysql.jdbc.Driver.connect"}},
	"com.mysql.jdbc.":                             {[]string{"com.mysql.jdbc.PreparedStatement.executeQuery"}, []string{"com.mysql.cj.jdbc.ConnectionImpl.prepareStatement"}},
	"org.mariadb.jdbc.":                           {[]string{"org.mariadb.jdbc.ClientPreparedStatement.executeQuery"}, []string{"org.mariadb.r2dbc.MariadbConnection.createStatement"}},
	"oracle.jdbc.":                                {[]string{"oracle.jdbc.driver.OraclePreparedStatement.executeQuery"}, []string{"oracle.ucp.jdbc.PoolDataSourceImpl.getConnection"}},
	"com.microsoft.sqlserver.jdbc.":               {[]string{"com.microsoft.sqlserver.jdbc.SQLServerPreparedStatement.executeQuery"}, []string{"com.microsoft.aad.msal4j.ConfidentialClientApplication.acquireToken"}},
	"com.mongodb.":                                {[]string{"com.mongodb.client.internal.MongoCollectionImpl.find", "com.mongodb.internal.connection.InternalStreamConnection.sendAndReceive"}, []string{"com.mongodbx.Client.find"}},
	"redis.clients.jedis.":                        {[]string{"redis.clients.jedis.Jedis.get"}, []string{"redis.embedded.RedisServer.start"}},
	"io.lettuce.core.":                            {[]string{"io.lettuce.core.RedisChannelHandler.dispatch"}, []string{"io.lettuce.test.Wait.untilTrue"}},
	"org.hibernate.":                              {[]string{"org.hibernate.loader.Loader.doQuery", "org.hibernate.internal.SessionImpl.find"}, []string{"org.hibernatex.Session.find"}},
	"org.springframework.jdbc.":                   {[]string{"org.springframework.jdbc.core.JdbcTemplate.query"}, []string{"org.springframework.web.servlet.DispatcherServlet.doService"}},
	"org.jooq.":                                   {[]string{"org.jooq.impl.AbstractQuery.execute"}, []string{"org.jooqx.Query.run"}},
	"com.zaxxer.hikari.":                          {[]string{"com.zaxxer.hikari.pool.HikariProxyPreparedStatement.executeQuery", "com.zaxxer.hikari.HikariDataSource.getConnection"}, []string{"com.zaxxer.nuprocess.NuProcessBuilder.start"}},
	"java.sql.":                                   {[]string{"java.sql.DriverManager.getConnection"}, []string{"java.sqlx.Foo.bar", "javax.sql.rowset.RowSetProvider.newFactory"}},
	"javax.sql.":                                  {[]string{"javax.sql.DataSource.getConnection"}, []string{"javax.swing.JFrame.setVisible"}},
	"java.net.http.HttpClient":                    {[]string{"java.net.http.HttpClient.send", "java.net.http.HttpClient$Builder.build"}, []string{"java.net.http.HttpClientImplX.send", "java.net.http.HttpRequest.newBuilder"}},
	"jdk.internal.net.http.":                      {[]string{"jdk.internal.net.http.HttpClientImpl.send", "jdk.internal.net.http.MultiExchange.responseAsync"}, []string{"jdk.internal.misc.Unsafe.park"}},
	"java.net.HttpURLConnection":                  {[]string{"java.net.HttpURLConnection.getResponseCode"}, []string{"java.net.HttpURLConnectionX.connect", "java.net.URL.openConnection"}},
	"sun.net.www.protocol.http.":                  {[]string{"sun.net.www.protocol.http.HttpURLConnection.getInputStream"}, []string{"sun.net.www.protocol.https.HttpsURLConnectionImpl.getInputStream"}},
	"okhttp3.":                                    {[]string{"okhttp3.internal.connection.RealCall.execute"}, []string{"okio.RealBufferedSource.read"}},
	"org.apache.http.impl.client.":                {[]string{"org.apache.http.impl.client.CloseableHttpClient.execute"}, []string{"org.apache.http.impl.conn.PoolingHttpClientConnectionManager.requestConnection"}},
	"org.apache.hc.client5.":                      {[]string{"org.apache.hc.client5.http.impl.classic.CloseableHttpClient.execute"}, []string{"org.apache.hc.core5.http.impl.io.BHttpConnectionBase.close"}},
	"org.springframework.web.client.RestTemplate": {[]string{"org.springframework.web.client.RestTemplate.doExecute", "org.springframework.web.client.RestTemplate$HttpEntityRequestCallback.doWithRequest"}, []string{"org.springframework.web.client.RestTemplateBuilder.build"}},
	"org.springframework.web.reactive.function.client.": {[]string{"org.springframework.web.reactive.function.client.ExchangeFunctions$DefaultExchangeFunction.exchange"}, []string{"org.springframework.web.reactive.function.server.RouterFunctions.route"}},
	"feign.":                                                       {[]string{"feign.SynchronousMethodHandler.invoke"}, []string{"feignx.Client.execute"}},
	"io.grpc.stub.ClientCalls":                                     {[]string{"io.grpc.stub.ClientCalls.blockingUnaryCall", "io.grpc.stub.ClientCalls$BlockingResponseStream.hasNext"}, []string{"io.grpc.stub.ClientCallStreamObserver.onNext"}},
	"org.apache.kafka.clients.producer.":                           {[]string{"org.apache.kafka.clients.producer.KafkaProducer.send"}, []string{"org.apache.kafka.clients.consumer.KafkaConsumer.poll"}},
	"javax.servlet.http.HttpServlet.service":                       {[]string{"javax.servlet.http.HttpServlet.service"}, []string{"javax.servlet.http.HttpServletRequestWrapper.getHeader"}},
	"jakarta.servlet.http.HttpServlet.service":                     {[]string{"jakarta.servlet.http.HttpServlet.service"}, []string{"jakarta.servlet.http.HttpServletResponseWrapper.setStatus"}},
	"org.springframework.web.servlet.DispatcherServlet.doDispatch": {[]string{"org.springframework.web.servlet.DispatcherServlet.doDispatch"}, []string{"org.springframework.web.servlet.DispatcherServlet.doDispatchX"}},
	"io.grpc.stub.ServerCalls":                                     {[]string{"io.grpc.stub.ServerCalls$UnaryServerCallHandler$UnaryServerCallListener.onHalfClose"}, []string{"io.grpc.stub.ServerCallStreamObserver.onNext"}},
	"org.springframework.kafka.listener.":                          {[]string{"org.springframework.kafka.listener.KafkaMessageListenerContainer$ListenerConsumer.run"}, []string{"org.springframework.kafka.core.KafkaTemplate.send"}},
	// Python: file paths where pip installs the packages.
	"site-packages/psycopg2/":             {[]string{"/venv/lib/python3.11/site-packages/psycopg2/extras.py", "/usr/lib/python3/dist-packages/psycopg2/extras.py"}, []string{"/venv/lib/python3.11/site-packages/psycopg2_pool/pool.py"}},
	"site-packages/psycopg/":              {[]string{"/venv/lib/python3.11/site-packages/psycopg/cursor.py"}, []string{"/venv/lib/python3.11/site-packages/psycopg_pool/pool.py"}},
	"site-packages/asyncpg/":              {[]string{"/venv/lib/python3.11/site-packages/asyncpg/connection.py"}, []string{"/venv/lib/python3.11/site-packages/asyncpg_listen/listener.py"}},
	"site-packages/pymysql/":              {[]string{"/venv/lib/python3.11/site-packages/pymysql/connections.py"}, []string{"/venv/lib/python3.11/site-packages/pymysqlpool/pool.py"}},
	"site-packages/MySQLdb/":              {[]string{"/venv/lib/python3.11/site-packages/MySQLdb/cursors.py"}, []string{"/venv/lib/python3.11/site-packages/mysqlclient-2.2.0.dist-info/METADATA"}},
	"site-packages/mysql/connector/":      {[]string{"/venv/lib/python3.11/site-packages/mysql/connector/cursor.py"}, []string{"/venv/lib/python3.11/site-packages/mysql/utilities/common.py"}},
	"/sqlite3/":                           {[]string{"/usr/lib/python3.11/sqlite3/dbapi2.py"}, []string{"/usr/lib/python3.11/sqlite3_helper.py"}},
	"site-packages/redis/":                {[]string{"/venv/lib/python3.11/site-packages/redis/client.py"}, []string{"/venv/lib/python3.11/site-packages/redis_om/model/model.py"}},
	"site-packages/pymongo/":              {[]string{"/venv/lib/python3.11/site-packages/pymongo/collection.py"}, []string{"/venv/lib/python3.11/site-packages/motor/motor_asyncio.py"}},
	"site-packages/sqlalchemy/":           {[]string{"/venv/lib/python3.11/site-packages/sqlalchemy/engine/base.py"}, []string{"/venv/lib/python3.11/site-packages/sqlalchemy_utils/functions/database.py"}},
	"site-packages/django/db/":            {[]string{"/venv/lib/python3.11/site-packages/django/db/backends/utils.py"}, []string{"/venv/lib/python3.11/site-packages/django/dbx/x.py", "/venv/lib/python3.11/site-packages/django/template/base.py"}},
	"site-packages/requests/":             {[]string{"/venv/lib/python3.11/site-packages/requests/sessions.py"}, []string{"/venv/lib/python3.11/site-packages/requests_toolbelt/multipart/encoder.py"}},
	"site-packages/urllib3/":              {[]string{"/venv/lib/python3.11/site-packages/urllib3/connectionpool.py"}, []string{"/usr/lib/python3.11/urllib/parse.py"}},
	"site-packages/httpx/":                {[]string{"/venv/lib/python3.11/site-packages/httpx/_client.py"}, []string{"/venv/lib/python3.11/site-packages/httpcore/_sync/connection.py"}},
	"site-packages/aiohttp/client":        {[]string{"/venv/lib/python3.11/site-packages/aiohttp/client.py", "/venv/lib/python3.11/site-packages/aiohttp/client_reqrep.py"}, []string{"/venv/lib/python3.11/site-packages/aiohttp/web_protocol.py"}},
	"/http/client.py":                     {[]string{"/usr/lib/python3.11/http/client.py"}, []string{"/usr/lib/python3.11/http/server.py"}},
	"/urllib/request.py":                  {[]string{"/usr/lib/python3.11/urllib/request.py"}, []string{"/usr/lib/python3.11/urllib/parse.py"}},
	"site-packages/grpc/_channel.py":      {[]string{"/venv/lib/python3.11/site-packages/grpc/_channel.py"}, []string{"/venv/lib/python3.11/site-packages/grpc/_server.py"}},
	"site-packages/botocore/":             {[]string{"/venv/lib/python3.11/site-packages/botocore/endpoint.py"}, []string{"/venv/lib/python3.11/site-packages/boto3/session.py"}},
	"site-packages/boto3/":                {[]string{"/venv/lib/python3.11/site-packages/boto3/resources/action.py"}, []string{"/venv/lib/python3.11/site-packages/botocore/endpoint.py"}},
	"site-packages/django/core/handlers/": {[]string{"/venv/lib/python3.11/site-packages/django/core/handlers/base.py"}, []string{"/venv/lib/python3.11/site-packages/django/core/cache/backends/base.py"}},
	"site-packages/flask/app.py":          {[]string{"/venv/lib/python3.11/site-packages/flask/app.py"}, []string{"/venv/lib/python3.11/site-packages/flask/templating.py"}},
	"site-packages/starlette/routing.py":  {[]string{"/venv/lib/python3.11/site-packages/starlette/routing.py"}, []string{"/venv/lib/python3.11/site-packages/starlette/responses.py"}},
	"site-packages/fastapi/routing.py":    {[]string{"/venv/lib/python3.11/site-packages/fastapi/routing.py"}, []string{"/venv/lib/python3.11/site-packages/fastapi/encoders.py"}},
	"site-packages/celery/app/trace.py":   {[]string{"/venv/lib/python3.11/site-packages/celery/app/trace.py"}, []string{"/venv/lib/python3.11/site-packages/celery/app/base.py"}},
	// Node.js: file paths where npm installs the packages.
	"node_modules/pg/":                            {[]string{"/srv/app/node_modules/pg/lib/client.js"}, []string{"/srv/app/node_modules/pg-protocol/dist/parser.js"}},
	"node_modules/pg-pool/":                       {[]string{"/srv/app/node_modules/pg-pool/index.js"}, []string{"/srv/app/node_modules/pg-types/index.js"}},
	"node_modules/postgres/":                      {[]string{"/srv/app/node_modules/postgres/cjs/src/connection.js"}, []string{"/srv/app/node_modules/postgres-array/index.js"}},
	"node_modules/mysql2/":                        {[]string{"/srv/app/node_modules/mysql2/lib/connection.js"}, []string{"/srv/app/node_modules/mysql/lib/Connection.js"}},
	"node_modules/mysql/":                         {[]string{"/srv/app/node_modules/mysql/lib/Connection.js"}, []string{"/srv/app/node_modules/mysql2/lib/connection.js"}},
	"node_modules/mongodb/":                       {[]string{"/srv/app/node_modules/mongodb/lib/collection.js"}, []string{"/srv/app/node_modules/mongodb-connection-string-url/lib/index.js"}},
	"node_modules/mongoose/":                      {[]string{"/srv/app/node_modules/mongoose/lib/query.js"}, []string{"/srv/app/node_modules/mongoose-paginate-v2/dist/index.js"}},
	"node_modules/ioredis/":                       {[]string{"/srv/app/node_modules/ioredis/built/Redis.js"}, []string{"/srv/app/node_modules/redis-errors/index.js"}},
	"node_modules/redis/":                         {[]string{"/srv/app/node_modules/redis/dist/index.js"}, []string{"/srv/app/node_modules/redis-parser/lib/parser.js"}},
	"node_modules/@redis/":                        {[]string{"/srv/app/node_modules/@redis/client/dist/lib/client/index.js"}, []string{"/srv/app/node_modules/@types/redis/index.d.ts"}},
	"node_modules/@prisma/client/":                {[]string{"/srv/app/node_modules/@prisma/client/runtime/library.js"}, []string{"/srv/app/node_modules/@prisma/debug/dist/index.js"}},
	"node_modules/sequelize/":                     {[]string{"/srv/app/node_modules/sequelize/lib/model.js"}, []string{"/srv/app/node_modules/sequelize-pool/lib/Pool.js"}},
	"node_modules/knex/":                          {[]string{"/srv/app/node_modules/knex/lib/execution/runner.js"}, []string{"/srv/app/node_modules/knex-paginate/lib/index.js"}},
	"node_modules/typeorm/":                       {[]string{"/srv/app/node_modules/typeorm/query-builder/SelectQueryBuilder.js"}, []string{"/srv/app/node_modules/typeorm-naming-strategies/index.js"}},
	"node_modules/axios/":                         {[]string{"/srv/app/node_modules/axios/lib/core/Axios.js"}, []string{"/srv/app/node_modules/axios-retry/dist/cjs/index.js"}},
	"node_modules/node-fetch/":                    {[]string{"/srv/app/node_modules/node-fetch/lib/index.js"}, []string{"/srv/app/node_modules/node-fetch-native/dist/index.cjs"}},
	"node_modules/undici/":                        {[]string{"/srv/app/node_modules/undici/lib/dispatcher/client.js"}, []string{"/srv/app/node_modules/undici-types/index.d.ts"}},
	"node_modules/got/":                           {[]string{"/srv/app/node_modules/got/dist/source/core/index.js"}, []string{"/srv/app/node_modules/gopd/index.js"}},
	"node:_http_client":                           {[]string{"node:_http_client"}, []string{"node:_http_server", "node:_http_common"}},
	"node_modules/@grpc/grpc-js/build/src/client": {[]string{"/srv/app/node_modules/@grpc/grpc-js/build/src/client.js"}, []string{"/srv/app/node_modules/@grpc/grpc-js/build/src/server.js"}},
	"node_modules/kafkajs/":                       {[]string{"/srv/app/node_modules/kafkajs/src/producer/index.js"}, []string{"/srv/app/node_modules/kafkajs-snappy/src/index.js"}},
	"node_modules/express/lib/router/":            {[]string{"/srv/app/node_modules/express/lib/router/layer.js"}, []string{"/srv/app/node_modules/express/lib/response.js"}},
	"node_modules/fastify/lib/":                   {[]string{"/srv/app/node_modules/fastify/lib/route.js"}, []string{"/srv/app/node_modules/fastify-plugin/plugin.js"}},
	"node_modules/koa/lib/":                       {[]string{"/srv/app/node_modules/koa/lib/application.js"}, []string{"/srv/app/node_modules/koa-router/lib/router.js"}},
	"node:_http_server":                           {[]string{"node:_http_server"}, []string{"node:_http_client"}},
}

// spanAudit does the same for the span rules, with span frames as the
// OpenTelemetry semantic conventions describe them (span kind plus the
// attribute family that sets Protocol).
var spanAudit = map[string]struct{ match, not []traces.Frame }{
	"client:database":  {[]traces.Frame{{Function: "SELECT plants", Span: true, SpanKind: traces.SpanKindClient, Protocol: traces.ProtocolDatabase}}, []traces.Frame{{Function: "GET", Span: true, SpanKind: traces.SpanKindClient, Protocol: traces.ProtocolHTTP}, {Function: "SELECT plants", Span: true, SpanKind: traces.SpanKindInternal, Protocol: traces.ProtocolDatabase}}},
	"client:rpc":       {[]traces.Frame{{Function: "greenhouse.Catalog/GetPlant", Span: true, SpanKind: traces.SpanKindClient, Protocol: traces.ProtocolRPC}}, []traces.Frame{{Function: "greenhouse.Catalog/GetPlant", Span: true, SpanKind: traces.SpanKindServer, Protocol: traces.ProtocolRPC}}},
	"client:http":      {[]traces.Frame{{Function: "GET", Span: true, SpanKind: traces.SpanKindClient, Protocol: traces.ProtocolHTTP}}, []traces.Frame{{Function: "GET /plants", Span: true, SpanKind: traces.SpanKindServer, Protocol: traces.ProtocolHTTP}}},
	"client:messaging": {[]traces.Frame{{Function: "publish orders", Span: true, SpanKind: traces.SpanKindProducer, Protocol: traces.ProtocolMessaging}}, []traces.Frame{{Function: "process orders", Span: true, SpanKind: traces.SpanKindConsumer, Protocol: traces.ProtocolMessaging}}},
	"server":           {[]traces.Frame{{Function: "GET /plants", Span: true, SpanKind: traces.SpanKindServer}}, []traces.Frame{{Function: "net/http.(*conn).serve"}, {Function: "render", Span: true, SpanKind: traces.SpanKindInternal}}},
	"consumer":         {[]traces.Frame{{Function: "process orders", Span: true, SpanKind: traces.SpanKindConsumer}}, []traces.Frame{{Function: "publish orders", Span: true, SpanKind: traces.SpanKindProducer, Protocol: traces.ProtocolMessaging}}},
}

// TestBuiltinRuleAudit checks every built-in rule against its real names:
// each name in match is decided by that rule (the first built-in rule to
// match it), each name in not is left alone by it. Every rule must have
// both.
func TestBuiltinRuleAudit(t *testing.T) {
	rules := DefaultRules().Rules
	first := func(f *traces.Frame) int {
		for i := range rules {
			if rules[i].Matches(f) {
				return i
			}
		}
		return -1
	}
	describe := func(i int) string {
		if i < 0 {
			return "no rule"
		}
		_, p := rules[i].Pattern()
		return p
	}
	seen := map[string]bool{}
	for i := range rules {
		r := &rules[i]
		kind, p := r.Pattern()
		seen[p] = true
		var match, not []traces.Frame
		switch kind {
		case "span":
			a, ok := spanAudit[p]
			if !ok {
				t.Errorf("span rule %q has no audit entry", p)
				continue
			}
			match, not = a.match, a.not
		case "function", "file":
			a, ok := ruleAudit[p]
			if !ok {
				t.Errorf("%s rule %q has no audit entry", kind, p)
				continue
			}
			for _, n := range a.match {
				match = append(match, auditFrame(kind, n))
			}
			for _, n := range a.not {
				not = append(not, auditFrame(kind, n))
			}
		default:
			t.Errorf("built-in rule %q of kind %s: add an audit for its kind", p, kind)
			continue
		}
		if len(match) == 0 || len(not) == 0 {
			t.Errorf("rule %q needs names it matches and names it must not match", p)
		}
		for k := range match {
			if got := first(&match[k]); got != i {
				t.Errorf("%+v: decided by %s, want rule %q", match[k], describe(got), p)
			}
		}
		for k := range not {
			if r.Matches(&not[k]) {
				t.Errorf("rule %q matches %+v, which it must leave alone", p, not[k])
			}
		}
	}
	for p := range ruleAudit {
		if !seen[p] {
			t.Errorf("audit entry %q names no built-in rule", p)
		}
	}
}

func auditFrame(kind, name string) traces.Frame {
	if kind == "file" {
		return traces.Frame{Function: "f", File: name}
	}
	return traces.Frame{Function: name}
}

func TestMatchFunction(t *testing.T) {
	for _, tc := range []struct {
		pattern, name string
		want          bool
	}{
		{"net/http.Head", "net/http.Head", true},
		{"net/http.Head", "net/http.Header.Set", false},
		{"net/http.Head", "net/http.Head.func1", true},
		{"net/http.Head", "net/http.Head-fm", true},
		{"net/http.(*Client).", "net/http.(*Client).Do", true},
		{"example.com/db.(*Pool", "example.com/db.(*Pool).Query", true},
		{"example.com/db.(*Pool", "example.com/db.(*PoolStats).Get", false},
		{"github.com/go-redis/redis", "github.com/go-redis/redis/v8.(*Client).Get", true},
		{"github.com/go-redis/redis", "github.com/go-redis/redismock/v8.NewClientMock", false},
		{"example.com/x.Map", "example.com/x.Map[go.shape.int]", true},
		{"com.example.Repo", "com.example.Repo$1.run", true},
		{"com.example.Repo", "com.example.RepoImpl.run", false},
		{"x.É", "x.Éa", false},
		{"", "anything", true},
	} {
		if got := matchFunction(tc.pattern, tc.name); got != tc.want {
			t.Errorf("matchFunction(%q, %q) = %v, want %v", tc.pattern, tc.name, got, tc.want)
		}
	}
}
